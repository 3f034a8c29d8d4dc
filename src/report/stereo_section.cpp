// The report's stereo section (sections.hpp): each channel of the copy against the same channel
// of the source, and the figures between the channels of both.
#include <cmath>
#include <cstddef>
#include <sstream>
#include <string>

#include "core/text_format.hpp"
#include "measure/channel_compare.hpp"
#include "measure/compare.hpp"
#include "report/sections.hpp"

namespace wane::report_sections {

namespace {

std::string cell(const char* format, double v) { return std::isfinite(v) ? printf_text(format, v) : std::string("–"); }

std::string snr_cell(double snr_db) {
    return std::isinf(snr_db) && snr_db > 0 ? std::string("identical") : cell("%.2f dB", snr_db);
}

}  // namespace

void write_stereo(std::ostringstream& h, const report_inputs& in) {
    if (in.stereo == nullptr) return;
    const channel_comparison& s = *in.stereo;
    h << "<section id='stereo'><h2>Channels</h2>\n<div class='grid'><table>"
      << "<tr><th>each channel against the same channel</th><th>left</th><th>right</th></tr>"
      << "<tr><td>log-spectral distance, whole note</td><td>" << cell("%.2f dB", s.left.whole.log_spectral_distance_db)
      << "</td><td>" << cell("%.2f dB", s.right.whole.log_spectral_distance_db) << "</td></tr>"
      << "<tr><td>spectral convergence</td><td>" << cell("%.4f", s.left.whole.spectral_convergence) << "</td><td>"
      << cell("%.4f", s.right.whole.spectral_convergence) << "</td></tr>"
      << "<tr><td>onset SNR, first " << printf_text("%.0f ms", 1000.0 * s.left.early_window_s) << "</td><td>"
      << snr_cell(s.left.early_snr_db) << "</td><td>" << snr_cell(s.right.early_snr_db) << "</td></tr></table>\n";
    h << "<table class='between'><tr><th>between the channels, first "
      << printf_text("%.0f s", inter_channel_params{}.span_s)
      << "</th><th>source</th><th>copy</th><th>copy − source</th></tr>";
    for (std::size_t i = 0; i < s.a.band_nominal_hz.size() && i < s.b.band_nominal_hz.size(); ++i) {
        const double da = s.a.level_difference_db[i], db = s.b.level_difference_db[i];
        h << "<tr><td>right − left level, " << printf_text("%.0f Hz", s.a.band_nominal_hz[i]) << " octave</td><td>"
          << cell("%+.2f dB", da) << "</td><td>" << cell("%+.2f dB", db) << "</td><td>" << cell("%+.2f dB", db - da)
          << "</td></tr>";
    }
    h << "<tr><td>correlation of left and right</td><td>" << cell("%.3f", s.a.correlation) << "</td><td>"
      << cell("%.3f", s.b.correlation) << "</td><td>" << cell("%+.3f", s.b.correlation - s.a.correlation)
      << "</td></tr></table></div>\n"
      << "<p class='note'>The other sections show the mix (the mean of the channels) of source and copy. Here each "
      << "channel is compared with the same channel as the headline compares the mix (after aligning it on its own). "
      << "Between the channels: the energy of right over left in octave bands (IEC 61260-1 filters) and the "
      << "correlation of the channels at zero lag, both over the first second from the onset, the copy placed by the "
      << "mix's alignment.</p></section>\n";
}

}  // namespace wane::report_sections

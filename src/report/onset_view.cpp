// The report's onset view: source and copy waveforms from just before the onset to 100 ms after,
// and their spectra over the first 20 ms and over 20-100 ms (short Hann windows).
#include <algorithm>
#include <cmath>
#include <vector>

#include "report/sections.hpp"
#include "report/svg_plot.hpp"

namespace wane::report_sections {

namespace {

using namespace report_plot;

constexpr double before_s = 0.005, after_s = 0.100;  // the waveform span around the onset
constexpr double split_s = 0.020;                     // first spectrum: onset .. split; second: split .. after
constexpr double wave_width = 1060, wave_height = 300, spectrum_width = 500, spectrum_height = 300;
constexpr double spectrum_range_db = 90.0;
constexpr int wave_columns = 700;                     // min/max pairs drawn per waveform
const char* const source_colour = okabe_ito::blue;
const char* const copy_colour = okabe_ito::vermilion;

/// Min/max of x per column over [from, to) as one polyline (the waveform's outline at any zoom).
void wave_line(std::ostringstream& h, const plot_frame& f, std::span<const float> x, double rate_hz, double onset_s,
               const char* colour) {
    h << "<polyline fill='none' stroke='" << colour << "' stroke-width='1' points='";
    for (int col = 0; col < wave_columns; ++col) {
        const double t0 = f.x0 + (f.x1 - f.x0) * col / wave_columns, t1 = f.x0 + (f.x1 - f.x0) * (col + 1) / wave_columns;
        const auto n0 = static_cast<std::ptrdiff_t>(std::floor((onset_s + t0) * rate_hz));
        const auto n1 = std::max(n0 + 1, static_cast<std::ptrdiff_t>(std::floor((onset_s + t1) * rate_hz)));
        float lo = 0.0f, hi = 0.0f;
        for (std::ptrdiff_t n = std::max<std::ptrdiff_t>(0, n0); n < n1 && n < static_cast<std::ptrdiff_t>(x.size()); ++n) {
            lo = std::min(lo, x[static_cast<std::size_t>(n)]);
            hi = std::max(hi, x[static_cast<std::size_t>(n)]);
        }
        const double px = f.px(0.5 * (t0 + t1));
        h << fmt("%.1f", px) << ',' << fmt("%.1f", f.py(hi)) << ' ' << fmt("%.1f", px) << ',' << fmt("%.1f", f.py(lo)) << ' ';
    }
    h << "'/>";
}

void spectrum_plot(std::ostringstream& h, const report_inputs& in, double from_s, double to_s, double top_hz) {
    const double rate = in.source_rate_hz, onset_s = in.value->source.onset_s;
    const auto start = static_cast<std::size_t>(std::max(0.0, std::round((onset_s + from_s) * rate)));
    const auto length = static_cast<std::size_t>(std::round((to_s - from_s) * rate));
    const spectrogram_db a = stretch_spectrum(in.source_audio, rate, start, length);
    const spectrogram_db b = stretch_spectrum(in.copy_in_source, rate, start, length);
    const double peak = std::ceil(static_cast<double>(*std::max_element(a.level_db.begin(), a.level_db.end())) / 10.0) * 10.0;
    const plot_frame f{.width = spectrum_width, .height = spectrum_height, .top = 30, .x0 = 0.0, .x1 = top_hz,
                       .y0 = peak - spectrum_range_db, .y1 = peak};
    h << "<svg class='spectrum' width='" << f.width << "' height='" << f.height << "' xmlns='http://www.w3.org/2000/svg'>"
      << "<text x='4' y='16' class='title'>spectrum " << fmt("%.0f", 1000.0 * from_s) << "-" << fmt("%.0f ms", 1000.0 * to_s)
      << " after the onset</text>";
    for (const auto& [s, colour] : {std::pair{&a, source_colour}, std::pair{&b, copy_colour}}) {
        h << "<polyline fill='none' stroke='" << colour << "' stroke-width='1.2' points='";
        const int last = std::min(s->bins - 1, static_cast<int>(top_hz / s->bin_hz));
        for (int k = 0; k <= last; ++k) {
            const double v = std::max(static_cast<double>(s->level_db[static_cast<std::size_t>(k)]), f.y0);
            h << fmt("%.1f", f.px(k * s->bin_hz)) << ',' << fmt("%.1f", f.py(v)) << ' ';
        }
        h << "'/>";
    }
    h << svg_axes(f, "frequency (Hz)", "level (dBFS)") << "</svg>\n";
}

/// Spectrum top: 1.2 times the highest partial within 60 dB of the loudest, at least 2 kHz, at
/// most the Nyquist frequency.
double spectrum_top_hz(const patch& p, double rate_hz) {
    double loudest = -infinity, highest = 0.0;
    for (const partial& q : p.partials) loudest = std::max(loudest, q.env.peak.db);
    for (const partial& q : p.partials) {
        if (q.env.peak.db >= loudest - 60.0) highest = std::max(highest, q.freq_hz);
    }
    return std::min(0.5 * rate_hz, std::max(2000.0, 1.2 * highest));
}

}  // namespace

void write_onset(std::ostringstream& h, const report_inputs& in) {
    h << "<section id='onset'><h2>The onset close up</h2>\n";
    if (in.copy_in_source.empty() || in.source_audio.empty()) {
        h << "<p>No copy to compare.</p></section>\n";
        return;
    }
    const double onset_s = in.value->source.onset_s, rate = in.source_rate_hz;
    float peak = 0.0f;
    const auto n0 = static_cast<std::size_t>(std::max(0.0, (onset_s - before_s) * rate));
    const auto n1 = std::min(in.source_audio.size(), static_cast<std::size_t>((onset_s + after_s) * rate));
    for (std::size_t n = n0; n < n1; ++n) {
        peak = std::max({peak, std::abs(in.source_audio[n]), std::abs(in.copy_in_source[n])});
    }
    const double y = std::max(1e-6, 1.05 * static_cast<double>(peak));
    const plot_frame f{.width = wave_width, .height = wave_height, .top = 30, .x0 = -before_s, .x1 = after_s, .y0 = -y, .y1 = y};
    h << "<svg class='wide' viewBox='0 0 " << f.width << " " << f.height << "' xmlns='http://www.w3.org/2000/svg'>"
      << "<text x='4' y='16' class='title'>waveforms: <tspan fill='" << source_colour << "'>source</tspan>, <tspan fill='"
      << copy_colour << "'>copy</tspan></text>";
    wave_line(h, f, in.source_audio, rate, onset_s, source_colour);
    wave_line(h, f, in.copy_in_source, rate, onset_s, copy_colour);
    h << svg_axes(f, "time from the onset (s)", "amplitude (full scale 1)") << "</svg>\n<div class='grid'>";
    const double top_hz = spectrum_top_hz(*in.value, rate);
    spectrum_plot(h, in, 0.0, split_s, top_hz);
    spectrum_plot(h, in, split_s, after_s, top_hz);
    h << "</div><p class='note'><span style='color:" << source_colour << "'>Blue</span>: the source; <span style='color:"
      << copy_colour << "'>vermilion</span>: the copy lined up with it. Waveforms drawn as the lowest and highest sample "
      << "per column; spectra over one Hann window each (0-20 ms: " << fmt("%.0f Hz", 1.0 / split_s)
      << " resolution; 20-100 ms), in dBFS re a full-scale sinusoid.</p></section>\n";
}

}  // namespace wane::report_sections

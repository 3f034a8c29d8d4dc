// The HTML report page: the page head, the summary with the headline and the difference
// sentences, the comparison table; the other sections in their own files (sections.hpp).
#include "report/report.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <sstream>

#include "core/pitch_names.hpp"
#include "core/units.hpp"
#include "measure/fidelity.hpp"
#include "measure/remarks.hpp"
#include "report/sections.hpp"
#include "report/svg_plot.hpp"

namespace wane {

namespace {

using namespace report_plot;

constexpr double cents_per_semitone = 100.0;  // by definition of the cent

using report_sections::seconds_text;

/// The headline figure, the sentences on the differences, and what every figure means.
void write_differences(std::ostringstream& h, const report_inputs& in) {
    std::vector<std::string> sentences = patch_remarks(*in.value);
    if (in.comparison != nullptr) {
        h << "<p id='headline'><b>" << escape_html(fidelity_headline(*in.comparison)) << "</b></p>\n";
        sentences.insert(sentences.begin(), in.comparison->remarks.sentences.begin(), in.comparison->remarks.sentences.end());
    } else {
        h << "<p id='headline'>" << escape_html(in.comparison_note.empty() ? "No comparison." : in.comparison_note) << "</p>\n";
    }
    h << "<ul id='differences'>";
    if (sentences.empty()) h << "<li class='none'>No difference of the kinds checked (see the definitions below).</li>";
    for (const std::string& line : sentences) h << "<li class='difference'>" << escape_html(line) << "</li>";
    h << "</ul>\n<details class='definitions'><summary>what the figures mean</summary><dl>";
    for (const auto& [name, definition] : figure_definitions()) {
        h << "<dt>" << escape_html(name) << "</dt><dd>" << escape_html(definition) << ".</dd>";
    }
    h << "</dl></details>\n";
}

void write_summary(std::ostringstream& h, const report_inputs& in) {
    const patch& p = *in.value;
    h << "<section id='summary'><h1>" << escape_html(in.title) << "</h1>\n<nav>"
      << "<a href='#spectrogram'>spectrograms</a> · <a href='#onset'>onset</a> · <a href='#envelopes'>envelopes</a> · "
      << "<a href='#noise'>noise bands</a> · <a href='#patch'>patch</a> · <a href='#compare'>source versus copy</a> · "
      << (in.stereo != nullptr ? "<a href='#stereo'>channels</a> · " : "") << "<a href='#listen'>listen</a>"
      << "</nav>\n<table class='facts'>";
    auto row = [&](const std::string& k, const std::string& v) {
        h << "<tr><th>" << escape_html(k) << "</th><td>" << escape_html(v) << "</td></tr>";
    };
    if (!p.note.name.empty()) row("note", p.note.name);
    if (p.note.f0_hz > 0.0) {
        const double midi = hz_to_midi(p.note.f0_hz);
        const int nearest = static_cast<int>(std::lround(midi));
        row("pitch", fmt("%.3f Hz", p.note.f0_hz) + " = " + note_name(nearest) + " " +
                         fmt("%+.1f cents", cents_per_semitone * (midi - nearest)) + (p.note.inharmonicity_b > 0.0
                                                                             ? ", inharmonicity B " + fmt("%.3g", p.note.inharmonicity_b)
                                                                             : std::string()));
    } else {
        row("pitch", "no pitch centre");
    }
    row("model", std::to_string(p.partials.size()) + " partials, " + std::to_string(p.noise.size()) +
                     " noise bands, " + seconds_text(p.note.length_s) + " long");
    row("source", p.source.file + ", " + fmt("%.0f Hz", p.source.sample_rate_hz) + ", onset at " +
                      fmt("%.3f s", p.source.onset_s));
    if (p.source.analysis) {
        const analysis_settings& a = *p.source.analysis;
        row("analysis", a.window + " window " + fmt("%.1f ms", 1000.0 * a.window_s) + ", FFT " +
                            std::to_string(a.fft_size) + ", hop " + fmt("%.1f ms", 1000.0 * a.hop_s));
    }
    h << "</table>\n";
    write_differences(h, in);
    h << "</section>\n";
}

std::string decay_cell(const decay_times& d) {
    // The ISO 3382-1 figure; else the fit over a range too close to the noise, in parentheses.
    if (std::isfinite(d.t30_s)) return fmt("%.3f s", d.t30_s);
    if (std::isfinite(d.t30_fit.t60_s)) return fmt("(%.3f s)", d.t30_fit.t60_s);
    return "–";
}

std::string decay_cell_t20(const decay_times& d) {
    if (std::isfinite(d.t20_s)) return fmt("%.3f s", d.t20_s);
    if (std::isfinite(d.t20_fit.t60_s)) return fmt("(%.3f s)", d.t20_fit.t60_s);
    return "–";
}

std::string value_or_dash(const char* format, double v) { return std::isfinite(v) ? fmt(format, v) : "–"; }

void write_compare(std::ostringstream& h, const report_inputs& in) {
    h << "<section id='compare'><h2>Source versus render</h2>\n";
    if (in.comparison == nullptr) {
        h << "<p>" << escape_html(in.comparison_note.empty() ? "No comparison." : in.comparison_note)
          << "</p></section>\n";
        return;
    }
    const compare_result& r = *in.comparison;
    const std::string early = "first " + fmt("%.0f ms", 1000.0 * r.early_window_s);
    std::string sizes;
    for (const auto& res : r.whole.per_resolution) sizes += (sizes.empty() ? "" : ", ") + std::to_string(res.fft_size);
    h << "<div class='grid'><table><tr><th>figure</th><th>whole note</th><th>" << early << "</th></tr>"
      << "<tr><td>log-spectral distance (STFT sizes " << sizes << ")</td><td>"
      << value_or_dash("%.2f dB", r.whole.log_spectral_distance_db) << "</td><td>"
      << value_or_dash("%.2f dB", r.early.log_spectral_distance_db) << "</td></tr>"
      << "<tr><td>spectral convergence</td><td>" << value_or_dash("%.4f", r.whole.spectral_convergence) << "</td><td>"
      << value_or_dash("%.4f", r.early.spectral_convergence) << "</td></tr>"
      << "<tr><td>time-domain SNR</td><td></td><td>"
      << (std::isinf(r.early_snr_db) && r.early_snr_db > 0 ? std::string("identical") : value_or_dash("%.2f dB", r.early_snr_db))
      << "</td></tr>";
    if (r.f0_difference_cents) {
        h << "<tr><td>f0 of the render against the source</td><td>" << value_or_dash("%+.2f cents", *r.f0_difference_cents)
          << "</td><td></td></tr>";
    }
    // b[n + lag] lines up with a[n] (measure/align.hpp): the render's first sample with a[-lag].
    const double aligned_s = in.comparison_from_s - static_cast<double>(r.align.lag_frames) / r.sample_rate_hz;
    h << "<tr><td>start of the render aligned to the source at</td><td>" << fmt("%.3f s", aligned_s)
      << " (patch onset " << fmt("%.3f s", in.value->source.onset_s) << ")</td><td></td></tr></table>\n";
    h << "<table><tr><th>octave band</th><th>T20 source</th><th>T20 render</th><th>T30 source</th><th>T30 render</th></tr>";
    for (const band_decay_pair& b : r.bands) {
        h << "<tr><td>" << fmt("%.0f Hz", b.band.nominal_hz) << "</td><td>" << decay_cell_t20(b.a) << "</td><td>"
          << decay_cell_t20(b.b) << "</td><td>" << decay_cell(b.a) << "</td><td>" << decay_cell(b.b) << "</td></tr>";
    }
    h << "</table></div>\n<p class='note'>Spectral distances over bins within "
      << fmt("%.0f dB", compare_params{}.spectral.range_db) << " of the source's peak, after "
      << "aligning the onsets. Decay times by Schroeder backward integration from the source's onset, T20 fitted "
      << "over −5..−25 dB and T30 over −5..−35 dB, extrapolated to 60 dB (ISO 3382-1); in parentheses: the range "
      << "lies within 10 dB of the noise or of the end of the file; –: the range is not reached.</p></section>\n";
}

}  // namespace

std::string make_report_html(const report_inputs& in) {
    assert(in.value != nullptr);
    std::ostringstream h;
    h << "<!DOCTYPE html>\n<html lang='en'><head><meta charset='utf-8'>"
      << "<meta name='viewport' content='width=device-width, initial-scale=1'>"
      << "<title>" << escape_html(in.title) << "</title><style>"
      << "body{font-family:system-ui,sans-serif;font-size:16px;max-width:1120px;margin:1em auto;padding:0 1em;"
      << "color:#222;line-height:1.4}h1{font-size:1.7em;margin:0.3em 0}nav{margin-bottom:0.8em}"
      << "svg text{font-size:13px;fill:#222}svg text.title{font-weight:600}svg.wide{width:100%;height:auto}"
      << "pre{font-size:13px;overflow-x:auto;background:#f6f6f6;padding:8px}"
      << "table{border-collapse:collapse;margin:0.4em 0}td,th{border:1px solid #ccc;padding:3px 10px;text-align:left}"
      << "th{background:#f2f2f2}table.facts th{width:11em}.grid{display:flex;flex-wrap:wrap;gap:12px 18px}"
      << "h2{border-bottom:1px solid #ddd;margin-top:1.4em}.note{color:#444;font-size:0.93em}"
      << "figure{margin:0.6em 0}figure.plot{margin:0}figcaption{font-weight:600}#headline{font-size:1.15em}"
      << "li.difference{margin:0.15em 0}details.group>summary,details.definitions>summary{cursor:pointer;margin:0.4em 0}"
      << "body:not([data-axis='log']) svg.log{display:none}body[data-axis='log'] svg.lin{display:none}"
      << "body[data-tracks='off'] g.tracks{display:none}"
      << "</style></head><body>\n";
    write_summary(h, in);
    report_sections::write_spectrograms(h, in);
    report_sections::write_onset(h, in);
    report_sections::write_envelopes(h, in);
    report_sections::write_noise(h, in);
    h << "<section id='patch'><h2>Patch</h2><pre>" << escape_html(in.info_table) << "</pre></section>\n";
    write_compare(h, in);
    report_sections::write_stereo(h, in);
    report_sections::write_listen(h, in);
    h << "</body></html>\n";
    return h.str();
}

}  // namespace wane

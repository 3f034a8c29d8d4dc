// The HTML report page: its sections, in order (see report.hpp).
#include "report/report.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <sstream>

#include "core/pitch_names.hpp"
#include "core/units.hpp"
#include "report/svg_plot.hpp"

namespace wane {

namespace {

using namespace report_plot;

// Page layout (SVG user units = CSS pixels at 100% zoom).
constexpr double spectrogram_width = 1060, spectrogram_height = 470, colour_bar_margin = 84;
constexpr double envelope_width = 352, envelope_height = 280, envelope_title_margin = 62;
constexpr std::size_t envelope_line_chars = 46, envelope_t60_lines = 2;  // more lines end in "..."
constexpr double spectrogram_range_db = 90.0;
constexpr double envelope_range_db = 80.0;   // plotted below each partial's peak
constexpr double envelope_headroom_db = 6.0;
constexpr double top_freq_margin = 1.1;       // spectrogram top over the highest partial shown
constexpr int envelope_curve_points = 240;
constexpr int spectrogram_freq_ticks = 8;     // about this many frequency ticks
constexpr double cents_per_semitone = 100.0;  // by definition of the cent
const char* const track_colour = "#ff5a1f";
const char* const measured_colour = "#79afe6";
const char* const fitted_colour = "#b0171f";

std::string seconds_text(double s) { return fmt(s < 10.0 ? "%.2f s" : "%.1f s", s); }

/// "T60 3.14 s to 0.65 s, then 7.68 s": each segment's T60 and where it ends, wrapped at segment
/// boundaries into lines of at most max_chars (a segment never splits).
std::vector<std::string> t60_lines(const envelope& env, std::size_t max_chars) {
    std::vector<std::string> lines{"T60"};
    bool first = true;
    for (const decay_segment& seg : env.decay) {
        std::string piece;
        if (std::isinf(seg.t60_s)) piece = "hold";
        else if (seg.t60_s < 0.0) piece = "rise " + fmt("%.2f s", -seg.t60_s);
        else piece = seconds_text(seg.t60_s);
        if (seg.until_s) piece += " to " + fmt("%.2f s", *seg.until_s);
        if (!first) lines.back() += ",";
        const std::string joined = lines.back() + (first ? " " : " then ") + piece;
        if (joined.size() <= max_chars || first) lines.back() = joined;
        else lines.push_back("then " + piece);
        first = false;
    }
    return lines;
}

/// Top frequency of the spectrogram: top_freq_margin above the highest partial within
/// spectrogram_range_db of the loudest, rounded up to a tick, at most limit_hz.
double spectrogram_top_hz(const patch& p, double limit_hz) {
    double loudest_db = -infinity;
    for (const partial& q : p.partials) loudest_db = std::max(loudest_db, q.env.peak.db);
    double highest_hz = 0.0;
    for (const partial& q : p.partials) {
        if (q.env.peak.db >= loudest_db - spectrogram_range_db) highest_hz = std::max(highest_hz, q.freq_hz);
    }
    if (highest_hz <= 0.0) return limit_hz;
    const double step = tick_step(top_freq_margin * highest_hz, spectrogram_freq_ticks);
    return std::min(limit_hz, std::ceil(top_freq_margin * highest_hz / step) * step);
}

constexpr double silence_amp = 1e-10;  // -200 dBFS: the peak shown for digital silence

float peak_abs(std::span<const float> x) {
    float peak = 0.0f;
    for (float v : x) peak = std::max(peak, std::abs(v));
    return peak;
}

void write_summary(std::ostringstream& h, const report_inputs& in) {
    const patch& p = *in.value;
    h << "<section id='summary'><h1>" << escape_html(in.title) << "</h1>\n<nav>"
      << "<a href='#spectrogram'>spectrogram</a> · <a href='#envelopes'>envelopes</a> · "
      << "<a href='#patch'>patch</a> · <a href='#compare'>source versus render</a> · <a href='#listen'>listen</a>"
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
    if (in.comparison != nullptr) {
        const compare_result& r = *in.comparison;
        row("render against source", "log-spectral distance " + fmt("%.2f dB", r.whole.log_spectral_distance_db) +
                                         " (whole note), " + fmt("%.2f dB", r.early.log_spectral_distance_db) +
                                         " (first " + fmt("%.0f ms", 1000.0 * r.early_window_s) + ")");
    }
    h << "</table></section>\n";
}

void write_spectrogram(std::ostringstream& h, const report_inputs& in) {
    const patch& p = *in.value;
    h << "<section id='spectrogram'><h2>Spectrogram and partial tracks</h2>\n";
    const spectrogram_db& s = in.spectrogram;
    if (s.frames <= 0 || s.bins <= 0) {
        h << "<p>No spectrogram.</p></section>\n";
        return;
    }
    const double top_hz = std::min(spectrogram_top_hz(p, in.max_plot_freq_hz), s.bin_hz * (s.bins - 1));
    const std::string png = spectrogram_png(s, top_hz, spectrogram_range_db);
    plot_frame f{.width = spectrogram_width, .height = spectrogram_height, .right = colour_bar_margin,
                 .x0 = s.start_s, .x1 = s.start_s + s.hop_s * s.frames, .y0 = 0.0, .y1 = top_hz};
    const double plot_w = f.width - f.left - f.right, plot_h = f.height - f.top - f.bottom;
    h << "<svg class='wide' viewBox='0 0 " << f.width << " " << f.height << "' xmlns='http://www.w3.org/2000/svg'>"
      << "<image x='" << f.left << "' y='" << f.top << "' width='" << plot_w << "' height='" << plot_h
      << "' preserveAspectRatio='none' href='data:image/png;base64," << base64_encode(png) << "'/>";
    h << "<clipPath id='spectrogram-clip'><rect x='" << f.left << "' y='" << f.top << "' width='" << plot_w
      << "' height='" << plot_h << "'/></clipPath><g clip-path='url(#spectrogram-clip)'>";
    if (in.tracking != nullptr) {
        for (const partial_track& t : in.tracking->tracks) {
            if (t.points.empty() || track_frequency_hz(t, in.tracking->window_s) > top_hz) continue;
            h << "<polyline fill='none' stroke='" << track_colour << "' stroke-width='1.3' points='";
            for (const track_point& pt : t.points) {
                h << fmt("%.1f", f.px(pt.time_s + p.source.onset_s)) << ',' << fmt("%.1f", f.py(pt.freq_hz)) << ' ';
            }
            h << "'/>";
        }
    }
    const double onset_x = f.px(p.source.onset_s);
    h << "<line x1='" << onset_x << "' x2='" << onset_x << "' y1='" << f.top << "' y2='" << f.top + plot_h
      << "' stroke='#2a7' stroke-width='1.5' stroke-dasharray='5,4'/><text x='" << onset_x + 4 << "' y='"
      << f.top + 14 << "' fill='#1a6'>onset</text></g>";
    // Colour bar: level_colour from 0 dB (top) to -range (bottom).
    constexpr int stops = 10;
    const double bar_x = f.width - f.right + 14, bar_w = 14;
    h << "<linearGradient id='level-bar' x1='0' y1='0' x2='0' y2='1'>";
    for (int i = 0; i <= stops; ++i) {
        h << "<stop offset='" << fmt("%.2f", static_cast<double>(i) / stops) << "' stop-color='"
          << hex_colour(level_colour(1.0 - static_cast<double>(i) / stops)) << "'/>";
    }
    h << "</linearGradient><rect x='" << bar_x << "' y='" << f.top << "' width='" << bar_w << "' height='" << plot_h
      << "' fill='url(#level-bar)' stroke='#444'/>";
    constexpr double bar_tick_db = 15.0;
    const long bar_ticks = std::lround(std::floor(spectrogram_range_db / bar_tick_db + 1e-9));
    for (long i = 0; i <= bar_ticks; ++i) {
        const double db = -static_cast<double>(i) * bar_tick_db;
        const double y = f.top + (-db / spectrogram_range_db) * plot_h;
        h << "<text x='" << bar_x + bar_w + 4 << "' y='" << y + 4.5 << "'>" << fmt("%.0f", db) << "</text>";
    }
    h << "<text transform='translate(" << f.width - 6 << "," << f.top + plot_h / 2
      << ") rotate(-90)' text-anchor='middle'>level re loudest (dB)</text>";
    h << svg_axes(f, "time in the source file (s)", "frequency (Hz)") << "</svg>\n";
    h << "<p class='note'>STFT levels from " << fmt("%.0f", -spectrogram_range_db)
      << " dB to 0 dB re the loudest bin (Blackman-Harris window, " << fmt("%.0f ms", 1000.0 * s.hop_s)
      << " between columns); <span style='color:" << track_colour << "'>orange</span>: the partial tracks the "
      << "analysis measured; green dashes: the onset.</p>\n</section>\n";
}

void write_envelopes(std::ostringstream& h, const report_inputs& in) {
    const patch& p = *in.value;
    h << "<section id='envelopes'><h2>Partial levels and fitted envelopes</h2>\n<p class='note'>The "
      << std::min<std::size_t>(p.partials.size(), static_cast<std::size_t>(std::max(0, in.envelope_plots)))
      << " strongest partials by peak level, in order of frequency. <span style='color:" << measured_colour
      << "'>Wide blue</span>: the level the analysis measured along the partial's track; <span style='color:"
      << fitted_colour << "'>thin red</span>: the envelope in the patch, dots at its segment ends.</p>\n"
      << "<div class='grid'>\n";
    std::vector<std::size_t> order(p.partials.size());
    for (std::size_t i = 0; i < order.size(); ++i) order[i] = i;
    std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) {
        return p.partials[a].env.peak.db > p.partials[b].env.peak.db;
    });
    order.resize(std::min<std::size_t>(order.size(), static_cast<std::size_t>(std::max(0, in.envelope_plots))));
    std::sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) {
        return p.partials[a].freq_hz < p.partials[b].freq_hz;
    });
    const double rate_hz = in.source_rate_hz > 0.0 ? in.source_rate_hz : p.source.sample_rate_hz;
    for (const std::size_t idx : order) {
        const partial& part = p.partials[idx];
        const int track_index = in.tracking != nullptr ? matching_track(part, *in.tracking, rate_hz) : -1;
        const partial_track* track = track_index >= 0 ? &in.tracking->tracks[static_cast<std::size_t>(track_index)] : nullptr;
        const double peak = part.env.peak.db;
        plot_frame f{.width = envelope_width, .height = envelope_height, .top = envelope_title_margin,
                     .x0 = 0.0, .x1 = std::max(0.1, p.note.length_s),
                     .y0 = std::floor((peak - envelope_range_db) / 10.0) * 10.0,
                     .y1 = std::ceil((peak + envelope_headroom_db) / 10.0) * 10.0};
        h << "<svg class='envelope' width='" << f.width << "' height='" << f.height << "' data-freq-hz='"
          << fmt("%.3f", part.freq_hz) << "'";
        if (track != nullptr) h << " data-track-freq-hz='" << fmt("%.3f", track_frequency_hz(*track, in.tracking->window_s)) << "'";
        h << " xmlns='http://www.w3.org/2000/svg'>";
        h << "<text x='4' y='16' class='title'>partial " << idx + 1;
        if (part.harmonic > 0) h << " (harmonic " << part.harmonic << ")";
        h << ", " << fmt("%.1f Hz", part.freq_hz) << "</text>"
          ;
        std::vector<std::string> t60 = t60_lines(part.env, envelope_line_chars);
        if (t60.size() > envelope_t60_lines) {
            t60.resize(envelope_t60_lines);
            t60.back() += " ...";
        }
        for (std::size_t i = 0; i < t60.size() && i < envelope_t60_lines; ++i) {
            h << "<text x='4' y='" << 34 + 16 * static_cast<double>(i) << "'>" << escape_html(t60[i]) << "</text>";
        }
        h << "<clipPath id='c" << idx << "'><rect x='" << f.left << "' y='" << f.top << "' width='"
          << f.width - f.left - f.right << "' height='" << f.height - f.top - f.bottom << "'/></clipPath>";
        h << "<g clip-path='url(#c" << idx << ")'>";
        if (track != nullptr) {
            h << "<polyline fill='none' stroke='" << measured_colour << "' stroke-width='6' stroke-linejoin='round' stroke-linecap='round' points='";
            for (const track_point& pt : track->points) {
                h << fmt("%.1f", f.px(pt.time_s)) << ',' << fmt("%.1f", f.py(std::max(pt.level_db, f.y0 - 10.0))) << ' ';
            }
            h << "'/>";
        }
        h << "<polyline fill='none' stroke='" << fitted_colour << "' stroke-width='1.5' points='";
        for (int i = 0; i <= envelope_curve_points; ++i) {
            const double t = f.x0 + (f.x1 - f.x0) * i / envelope_curve_points;
            const double lv = std::max(envelope_level(part.env, t).db, f.y0 - 10.0);
            h << fmt("%.1f", f.px(t)) << ',' << fmt("%.1f", f.py(lv)) << ' ';
        }
        h << "'/>";
        for (const decay_segment& seg : part.env.decay) {
            if (!seg.until_s) continue;
            h << "<circle cx='" << fmt("%.1f", f.px(*seg.until_s)) << "' cy='"
              << fmt("%.1f", f.py(std::max(envelope_level(part.env, *seg.until_s).db, f.y0 - 10.0)))
              << "' r='3' fill='" << fitted_colour << "'/>";
        }
        h << "</g>";
        if (track == nullptr) {
            h << "<text x='" << f.left + 8 << "' y='" << f.height - f.bottom - 8 << "'>no measured track</text>";
        }
        h << svg_axes(f, "time from onset (s)", "level (dBFS)") << "</svg>\n";
    }
    h << "</div></section>\n";
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

void write_player(std::ostringstream& h, const std::string& label, std::span<const float> audio, double rate_hz) {
    const float peak = peak_abs(audio);
    h << "<p><b>" << escape_html(label) << "</b> (" << seconds_text(static_cast<double>(audio.size()) / rate_hz) << ", "
      << fmt("%.0f Hz", rate_hz) << ", peak " << fmt("%.1f dBFS", to_level(amp_lin{std::max(static_cast<double>(peak), silence_amp)}).db);
    if (peak > 1.0f) h << "; scaled down by " << fmt("%.1f dB", to_level(amp_lin{static_cast<double>(peak)}).db) << " to avoid clipping";
    h << ")<br><audio controls preload='metadata' src='data:audio/wav;base64,"
      << base64_encode(wav_bytes(audio, rate_hz)) << "'></audio></p>\n";
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
      << "</style></head><body>\n";
    write_summary(h, in);
    write_spectrogram(h, in);
    write_envelopes(h, in);
    h << "<section id='patch'><h2>Patch</h2><pre>" << escape_html(in.info_table) << "</pre></section>\n";
    write_compare(h, in);
    h << "<section id='listen'><h2>Listen</h2><p class='note'>Audition at low volume first.</p>\n";
    if (!in.source_audio.empty()) {
        write_player(h, "Source" + (in.source_name.empty() ? std::string() : ": " + in.source_name), in.source_audio,
                     in.source_rate_hz);
    }
    if (!in.render_audio.empty()) write_player(h, "Render of the patch", in.render_audio, in.render_rate_hz);
    h << "</section>\n</body></html>\n";
    return h.str();
}

}  // namespace wane

// The report's envelope plots: every partial (grouped by frequency, a button to hear it alone)
// and every noise band, each with the level the analysis measured, the envelope in the patch and
// its segment boundaries.
#include <algorithm>
#include <cmath>
#include <vector>

#include "analysis/noise_model.hpp"
#include "report/sections.hpp"
#include "report/svg_plot.hpp"

namespace wane::report_sections {

namespace {

using namespace report_plot;

constexpr double plot_width = 340, plot_height = 280, title_margin = 62;
constexpr std::size_t line_chars = 46, t60_lines_shown = 2;  // more lines end in "..."
constexpr double range_db = 80.0;     // plotted below each envelope's peak
constexpr double headroom_db = 6.0;
constexpr int curve_points = 240;
const char* const measured_colour = okabe_ito::sky_blue;
const char* const fitted_colour = okabe_ito::vermilion;

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
    if (lines.size() > t60_lines_shown) {
        lines.resize(t60_lines_shown);
        lines.back() += " ...";
    }
    return lines;
}

struct measured_line {
    std::vector<double> time_s;  ///< from the onset
    std::vector<double> level_db;
};

/// One envelope plot: title, T60 text, measured level (wide), fitted envelope (thin) with dots at
/// the segment ends. `attributes` go on the <svg>.
void envelope_svg(std::ostringstream& h, char id_kind, std::size_t id_index, const std::string& title, const std::string& attributes,
                  const envelope& env, const measured_line* measured, double length_s) {
    const double peak = env.peak.db;
    const plot_frame f{.width = plot_width, .height = plot_height, .top = title_margin, .x0 = 0.0,
                       .x1 = std::max(0.1, length_s), .y0 = std::floor((peak - range_db) / 10.0) * 10.0,
                       .y1 = std::ceil((peak + headroom_db) / 10.0) * 10.0};
    h << "<svg class='envelope' width='" << f.width << "' height='" << f.height << "'" << attributes
      << " xmlns='http://www.w3.org/2000/svg'><text x='4' y='16' class='title'>" << escape_html(title) << "</text>";
    const std::vector<std::string> t60 = t60_lines(env, line_chars);
    for (std::size_t i = 0; i < t60.size(); ++i) {
        h << "<text x='4' y='" << 34 + 16 * static_cast<double>(i) << "'>" << escape_html(t60[i]) << "</text>";
    }
    std::string id(1, id_kind);
    id += std::to_string(id_index);
    h << "<clipPath id='" << id << "'><rect x='" << f.left << "' y='" << f.top << "' width='" << f.width - f.left - f.right
      << "' height='" << f.height - f.top - f.bottom << "'/></clipPath><g clip-path='url(#" << id << ")'>";
    const double low = f.y0 - 10.0;
    if (measured != nullptr) {
        h << "<polyline fill='none' stroke='" << measured_colour
          << "' stroke-width='6' stroke-linejoin='round' stroke-linecap='round' points='";
        for (std::size_t i = 0; i < measured->time_s.size(); ++i) {
            h << fmt("%.1f", f.px(measured->time_s[i])) << ',' << fmt("%.1f", f.py(std::max(measured->level_db[i], low))) << ' ';
        }
        h << "'/>";
    }
    h << "<polyline fill='none' stroke='" << fitted_colour << "' stroke-width='1.5' points='";
    for (int i = 0; i <= curve_points; ++i) {
        const double t = f.x0 + (f.x1 - f.x0) * i / curve_points;
        h << fmt("%.1f", f.px(t)) << ',' << fmt("%.1f", f.py(std::max(envelope_level(env, t).db, low))) << ' ';
    }
    h << "'/>";
    for (const decay_segment& seg : env.decay) {
        if (!seg.until_s) continue;
        h << "<circle cx='" << fmt("%.1f", f.px(*seg.until_s)) << "' cy='"
          << fmt("%.1f", f.py(std::max(envelope_level(env, *seg.until_s).db, low))) << "' r='3' fill='" << fitted_colour << "'/>";
    }
    h << "</g>";
    if (measured == nullptr) h << "<text x='" << f.left + 8 << "' y='" << f.height - f.bottom - 8 << "'>no measured level</text>";
    h << svg_axes(f, "time from onset (s)", "level (dBFS)") << "</svg>";
}

void partial_plot(std::ostringstream& h, const report_inputs& in, std::size_t idx) {
    const patch& p = *in.value;
    const partial& part = p.partials[idx];
    const double rate_hz = in.source_rate_hz > 0.0 ? in.source_rate_hz : p.source.sample_rate_hz;
    const int track_index = in.tracking != nullptr ? matching_track(part, *in.tracking, rate_hz) : -1;
    const partial_track* track = track_index >= 0 ? &in.tracking->tracks[static_cast<std::size_t>(track_index)] : nullptr;
    measured_line line;
    std::string attributes = " data-freq-hz='" + fmt("%.3f", part.freq_hz) + "'";
    if (track != nullptr) {
        attributes += " data-track-freq-hz='" + fmt("%.3f", track_frequency_hz(*track, in.tracking->window_s)) + "'";
        for (const track_point& pt : track->points) {
            line.time_s.push_back(pt.time_s);
            line.level_db.push_back(pt.level_db);
        }
    }
    std::string title = "partial " + std::to_string(idx + 1);
    if (part.harmonic > 0) title += " (harmonic " + std::to_string(part.harmonic) + ")";
    title += ", " + fmt("%.1f Hz", part.freq_hz);
    h << "<figure class='plot'>";
    envelope_svg(h, 'p', idx, title, attributes, part.env, track != nullptr ? &line : nullptr, p.note.length_s);
    h << "<br><button type='button' class='solo' data-partial='" << idx << "'>play partial " << idx + 1
      << " alone</button></figure>\n";
}

}  // namespace

std::string seconds_text(double s) { return fmt(s < 10.0 ? "%.2f s" : "%.1f s", s); }

void write_envelopes(std::ostringstream& h, const report_inputs& in) {
    const patch& p = *in.value;
    const std::size_t group = static_cast<std::size_t>(std::max(1, in.envelope_group));
    h << "<section id='envelopes'><h2>Partial levels and fitted envelopes</h2>\n<p class='note'>All "
      << p.partials.size() << " partials in order of frequency, in groups of " << group << " (open a group to see it). "
      << "<span style='color:" << measured_colour << "'>Wide sky blue</span>: the level the analysis measured along the "
      << "partial's track; <span style='color:" << fitted_colour << "'>thin vermilion</span>: the envelope in the patch, "
      << "dots at its segment ends. The button plays the partial alone, rendered in the page from the patch's numbers.</p>\n";
    for (std::size_t first = 0; first < p.partials.size(); first += group) {
        const std::size_t last = std::min(p.partials.size(), first + group) - 1;
        h << "<details class='group'" << (first == 0 ? " open" : "") << "><summary>partials " << first + 1 << "-" << last + 1
          << " (" << fmt("%.0f", p.partials[first].freq_hz) << "-" << fmt("%.0f Hz", p.partials[last].freq_hz)
          << ")</summary><div class='grid'>\n";
        for (std::size_t idx = first; idx <= last; ++idx) partial_plot(h, in, idx);
        h << "</div></details>\n";
    }
    h << "</section>\n";
}

void write_noise(std::ostringstream& h, const report_inputs& in) {
    const patch& p = *in.value;
    h << "<section id='noise'><h2>Noise bands</h2>\n";
    if (p.noise.empty()) {
        h << "<p>The patch has no noise bands.</p></section>\n";
        return;
    }
    std::vector<noise_band_track> measured;
    const auto onset = static_cast<std::size_t>(std::lround(p.source.onset_s * in.source_rate_hz));
    if (!in.partials_in_source.empty() && onset < in.source_audio.size()) {
        std::vector<float> residual(in.source_audio.begin() + static_cast<std::ptrdiff_t>(onset), in.source_audio.end());
        for (std::size_t n = 0; n < residual.size(); ++n) residual[n] -= in.partials_in_source[onset + n];
        std::vector<double> freqs;
        for (const partial& q : p.partials) freqs.push_back(q.freq_hz);
        measured = measure_noise_bands(residual, in.source_rate_hz, freqs, p.note.f0_hz, {});
    }
    h << "<p class='note'>Every band's level in the source minus the copy's partials (measured as the analysis measures "
      << "it: Hann window, bins near a partial left out), wide sky blue; the band's envelope in the patch, thin vermilion, "
      << "dots at its segment ends.</p><div class='grid'>\n";
    for (std::size_t i = 0; i < p.noise.size(); ++i) {
        const noise_band& band = p.noise[i];
        const auto it = std::find_if(measured.begin(), measured.end(), [&](const noise_band_track& t) {
            return std::abs(t.low_hz - band.low_hz) < 1e-6 * band.high_hz && std::abs(t.high_hz - band.high_hz) < 1e-6 * band.high_hz;
        });
        measured_line line;
        if (it != measured.end()) {
            for (std::size_t k = 0; k < it->level_db.size(); ++k) {
                line.time_s.push_back(static_cast<double>(k) * it->hop_s);
                line.level_db.push_back(static_cast<double>(it->level_db[k]));
            }
        }
        h << "<figure class='plot'>";
        std::string title = "noise band ";
        title.append(fmt("%.0f", band.low_hz)).append("-").append(fmt("%.0f Hz", band.high_hz));
        std::string attributes = " data-low-hz='";
        attributes.append(fmt("%.1f", band.low_hz)).append("'");
        envelope_svg(h, 'n', i, title, attributes, band.env, it != measured.end() ? &line : nullptr,
                     p.note.length_s);
        h << "</figure>\n";
    }
    h << "</div></section>\n";
}

}  // namespace wane::report_sections

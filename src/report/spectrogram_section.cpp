// The report's spectrograms: source (with the partial tracks, thin and optional), copy, and copy
// minus source on a diverging scale, each on a linear and a log frequency axis up to the top
// (the source's Nyquist frequency unless asked lower); a switch on the page shows one axis.
#include <algorithm>
#include <cmath>

#include "report/sections.hpp"
#include "report/spectrogram_image.hpp"
#include "report/svg_plot.hpp"

namespace wane::report_sections {

namespace {

using namespace report_plot;

constexpr double plot_width = 1060, plot_height = 430, colour_bar_margin = 84;
constexpr double range_db = 90.0;        // levels shown below the loudest
constexpr double diff_range_db = 24.0;   // difference scale: +-24 dB at the ends
constexpr double log_low_hz = 20.0;      // bottom of the log axis (bottom of human hearing, common practice)
constexpr double track_range_db = 60.0;  // tracks drawn when their loudest point is within this of the loudest track's
constexpr int bar_stops = 10;

struct picture {
    const char* id;
    const char* title;
    std::string linear_png, log_png;
    bool difference;
};

/// The colour bar beside a plot: level (0 .. -range) or difference (+range .. -range).
void colour_bar(std::ostringstream& h, const plot_frame& f, const std::string& id, bool difference) {
    const double bar_x = f.width - f.right + 14, bar_w = 14, plot_h = f.height - f.top - f.bottom;
    h << "<linearGradient id='" << id << "-bar' x1='0' y1='0' x2='0' y2='1'>";
    for (int i = 0; i <= bar_stops; ++i) {
        const double u = static_cast<double>(i) / bar_stops;  // 0 at the top
        const rgb c = difference ? diverging_colour(1.0 - 2.0 * u) : level_colour(1.0 - u);
        h << "<stop offset='" << fmt("%.2f", u) << "' stop-color='" << hex_colour(c) << "'/>";
    }
    h << "</linearGradient><rect x='" << bar_x << "' y='" << f.top << "' width='" << bar_w << "' height='" << plot_h
      << "' fill='url(#" << id << "-bar)' stroke='#444'/>";
    const double top_db = difference ? diff_range_db : 0.0, span_db = difference ? 2.0 * diff_range_db : range_db;
    const double step = difference ? 12.0 : 15.0;
    const long ticks = std::lround(std::floor(span_db / step + 1e-9));
    for (long i = 0; i <= ticks; ++i) {
        const double db = top_db - static_cast<double>(i) * step;
        const double y = f.top + (top_db - db) / span_db * plot_h;
        h << "<text x='" << bar_x + bar_w + 4 << "' y='" << y + 4.5 << "'>" << fmt(difference ? "%+.0f" : "%.0f", db) << "</text>";
    }
    h << "<text transform='translate(" << f.width - 6 << "," << f.top + plot_h / 2 << ") rotate(-90)' text-anchor='middle'>"
      << (difference ? "copy minus source (dB)" : "level re loudest (dB)") << "</text>";
}

void tracks(std::ostringstream& h, const report_inputs& in, const plot_frame& f, const char* axis_class) {
    if (in.tracking == nullptr) return;
    double loudest = -infinity;
    for (const partial_track& t : in.tracking->tracks) {
        for (const track_point& pt : t.points) loudest = std::max(loudest, pt.level_db);
    }
    h << "<g class='tracks " << axis_class << "'>";
    for (const partial_track& t : in.tracking->tracks) {
        double top = -infinity;
        for (const track_point& pt : t.points) top = std::max(top, pt.level_db);
        if (t.points.empty() || top < loudest - track_range_db) continue;
        h << "<polyline fill='none' stroke='" << okabe_ito::vermilion << "' stroke-width='0.9' points='";
        for (const track_point& pt : t.points) {
            h << fmt("%.1f", f.px(pt.time_s + in.value->source.onset_s)) << ',' << fmt("%.1f", f.py(pt.freq_hz)) << ' ';
        }
        h << "'/>";
    }
    h << "</g>";
}

void one_picture(std::ostringstream& h, const report_inputs& in, const picture& pic, double top_hz) {
    const spectrogram_db& s = in.spectrogram;
    h << "<figure id='" << pic.id << "'><figcaption>" << pic.title << "</figcaption>";
    for (const freq_axis axis : {freq_axis::linear, freq_axis::log}) {
        const bool log = axis == freq_axis::log;
        const char* cls = log ? "log" : "lin";
        const plot_frame f{.width = plot_width, .height = plot_height, .right = colour_bar_margin, .x0 = s.start_s,
                           .x1 = s.start_s + s.hop_s * s.frames, .y0 = log ? log_low_hz : 0.0, .y1 = top_hz, .log_y = log};
        const double plot_w = f.width - f.left - f.right, plot_h = f.height - f.top - f.bottom;
        const std::string clip = std::string(pic.id) + "-" + cls;
        h << "<svg class='wide " << cls << "' viewBox='0 0 " << f.width << " " << f.height
          << "' xmlns='http://www.w3.org/2000/svg'><image x='" << f.left << "' y='" << f.top << "' width='" << plot_w
          << "' height='" << plot_h << "' preserveAspectRatio='none' href='data:image/png;base64,"
          << base64_encode(log ? pic.log_png : pic.linear_png) << "'/><clipPath id='" << clip << "'><rect x='" << f.left
          << "' y='" << f.top << "' width='" << plot_w << "' height='" << plot_h << "'/></clipPath><g clip-path='url(#"
          << clip << ")'>";
        if (std::string(pic.id) == "spectrogram-source") tracks(h, in, f, cls);
        const double onset_x = f.px(in.value->source.onset_s);
        h << "<line x1='" << onset_x << "' x2='" << onset_x << "' y1='" << f.top << "' y2='" << f.top + plot_h
          << "' stroke='" << okabe_ito::bluish_green << "' stroke-width='1.5' stroke-dasharray='5,4'/></g>";
        colour_bar(h, f, clip, pic.difference);
        h << svg_axes(f, "time in the source file (s)", "frequency (Hz)") << "</svg>";
    }
    h << "</figure>\n";
}

}  // namespace

void write_spectrograms(std::ostringstream& h, const report_inputs& in) {
    const spectrogram_db& s = in.spectrogram;
    h << "<section id='spectrogram'><h2>Spectrograms: source, copy, difference</h2>\n";
    if (s.frames <= 0 || s.bins <= 0) {
        h << "<p>No spectrogram.</p></section>\n";
        return;
    }
    const double nyquist_hz = s.bin_hz * (s.bins - 1);
    const double top_hz = in.max_plot_freq_hz > 0.0 ? std::min(in.max_plot_freq_hz, nyquist_hz) : nyquist_hz;
    h << "<p class='controls'>frequency axis: <label><input type='radio' name='freq-axis' value='lin' checked> "
         "linear</label> <label><input type='radio' name='freq-axis' value='log'> log</label> · <label><input "
         "type='checkbox' id='show-tracks' checked> partial tracks</label></p>\n";
    std::vector<picture> pictures;
    pictures.push_back({"spectrogram-source", "Source", level_png(s, 0.0, top_hz, freq_axis::linear, range_db),
                        level_png(s, log_low_hz, top_hz, freq_axis::log, range_db), false});
    if (!in.copy_in_source.empty()) {
        const spectrogram_db c = make_spectrogram(in.copy_in_source, in.source_rate_hz);
        pictures.push_back({"spectrogram-copy", "Copy (the render of the patch, lined up with the source)",
                            level_png(c, 0.0, top_hz, freq_axis::linear, range_db),
                            level_png(c, log_low_hz, top_hz, freq_axis::log, range_db), false});
        pictures.push_back({"spectrogram-difference", "Difference: copy minus source",
                            difference_png(s, c, 0.0, top_hz, freq_axis::linear, range_db, diff_range_db),
                            difference_png(s, c, log_low_hz, top_hz, freq_axis::log, range_db, diff_range_db), true});
    }
    for (const picture& pic : pictures) one_picture(h, in, pic, top_hz);
    h << "<p class='note'>STFT levels from " << fmt("%.0f", -range_db) << " dB to 0 dB re the source's loudest bin "
      << "(Blackman-Harris window, " << fmt("%.0f ms", 1000.0 * s.hop_s) << " between columns), colour map cubehelix "
      << "(Green 2011: lightness rises evenly, readable in grey and by colour-blind viewers). The difference is "
      << "copy minus source per pixel, both floored " << fmt("%.0f", range_db) << " dB below the source's loudest bin, "
      << "from blue (copy quieter) through white (equal) to vermilion (copy louder), clipped at ±"
      << fmt("%.0f", diff_range_db) << " dB (Okabe-Ito blue and vermilion, Okabe &amp; Ito 2008). Thin "
      << "vermilion lines: the partial tracks the analysis measured (within " << fmt("%.0f", track_range_db)
      << " dB of the loudest); green dashes: the onset.</p>\n</section>\n";
}

}  // namespace wane::report_sections

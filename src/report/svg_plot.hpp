// SVG plot pieces and text helpers for the report: colours, number text, HTML escaping, axes.
#pragma once

#include <algorithm>
#include <cmath>
#include <string>
#include <string_view>

namespace wane::report_plot {

struct rgb {
    unsigned char r, g, b;
};

/// Cubehelix colour of a lightness 0 (black) .. 1 (white) (see svg_plot.cpp).
rgb cubehelix(double lightness);
/// Spectrogram colour of a level fraction (0 = range_db below the peak or quieter, 1 = the peak):
/// quiet is white paper, loud is dark ink.
rgb level_colour(double fraction);
/// Diverging colour of a difference fraction in -1..1 (clamped): Okabe-Ito blue (-1) through
/// white (0) to Okabe-Ito vermilion (+1), interpolated in linear-light sRGB (see svg_plot.cpp).
rgb diverging_colour(double fraction);

/// The Okabe-Ito palette (Okabe & Ito 2008, "Color Universal Design"; values from memory):
/// distinguishable under the common colour-vision deficiencies. Lines and markers use these.
namespace okabe_ito {
inline constexpr const char* orange = "#e69f00";
inline constexpr const char* sky_blue = "#56b4e9";
inline constexpr const char* bluish_green = "#009e73";
inline constexpr const char* blue = "#0072b2";
inline constexpr const char* vermilion = "#d55e00";
inline constexpr const char* reddish_purple = "#cc79a7";
}  // namespace okabe_ito

/// "#rrggbb".
std::string hex_colour(rgb c);
/// One number through a printf format, e.g. fmt("%.2f dB", -3.0) -> "-3.00 dB".
std::string fmt(const char* format, double v);
std::string escape_html(std::string_view text);
/// "Nice" tick step for an axis span (1, 2 or 5 times a power of ten).
double tick_step(double span, int target_ticks);

/// Plot frame: maps data (x, y) to SVG pixels inside margins.
struct plot_frame {
    double width, height, left = 64, right = 16, top = 16, bottom = 48;
    double x0, x1, y0, y1;
    bool log_y = false;  ///< y on a log scale (y0 > 0)
    double px(double x) const { return left + (x - x0) / (x1 - x0) * (width - left - right); }
    double py(double y) const {
        const double u = log_y ? std::log(std::max(y, y0) / y1) / std::log(y0 / y1) : (y1 - y) / (y1 - y0);
        return top + u * (height - top - bottom);
    }
};

/// The frame's box, ticks with their numbers, and the two axis labels (a log y axis gets ticks at
/// 1, 2 and 5 times the powers of ten).
std::string svg_axes(const plot_frame& f, const std::string& x_label, const std::string& y_label);

}  // namespace wane::report_plot

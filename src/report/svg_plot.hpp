// SVG plot pieces and text helpers for the report: colours, number text, HTML escaping, axes.
#pragma once

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
    double px(double x) const { return left + (x - x0) / (x1 - x0) * (width - left - right); }
    double py(double y) const { return top + (y1 - y) / (y1 - y0) * (height - top - bottom); }
};

/// The frame's box, ticks with their numbers, and the two axis labels.
std::string svg_axes(const plot_frame& f, const std::string& x_label, const std::string& y_label);

}  // namespace wane::report_plot

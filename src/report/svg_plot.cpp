// SVG plot pieces and text helpers for the report (see svg_plot.hpp).
#include "core/text_format.hpp"
#include "report/svg_plot.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <sstream>

#include "core/units.hpp"

namespace wane::report_plot {

/// Cubehelix colour scheme (Green 2011, Bull. Astr. Soc. India 39, 289; constants from memory):
/// lightness l runs 0 (black) .. 1 (white) with a helical hue; start 0.5, rotations -0.5, hue 0.9
/// keep it a blue-violet ramp, monotone in perceived lightness, so red-orange tracks stand out.
rgb cubehelix(double lightness) {
    constexpr double start = 0.5, rotations = -0.5, hue = 0.9;
    const double l = std::clamp(lightness, 0.0, 1.0);
    const double angle = two_pi * (start / 3.0 + 1.0 + rotations * l);
    const double amp = hue * l * (1.0 - l) / 2.0;
    const double c = std::cos(angle), s = std::sin(angle);
    auto to_byte = [](double v) { return static_cast<unsigned char>(std::lround(255.0 * std::clamp(v, 0.0, 1.0))); };
    return {to_byte(l + amp * (-0.14861 * c + 1.78277 * s)), to_byte(l + amp * (-0.29227 * c - 0.90649 * s)),
            to_byte(l + amp * (1.97294 * c))};
}

rgb level_colour(double fraction) { return cubehelix(1.0 - std::clamp(fraction, 0.0, 1.0)); }

rgb diverging_colour(double fraction) {
    // sRGB transfer function (IEC 61966-2-1) both ways, so the blend is even in light.
    auto to_linear = [](double v) { return v <= 0.04045 ? v / 12.92 : std::pow((v + 0.055) / 1.055, 2.4); };
    auto to_byte = [](double v) {
        const double e = v <= 0.0031308 ? 12.92 * v : 1.055 * std::pow(v, 1.0 / 2.4) - 0.055;
        return static_cast<unsigned char>(std::lround(255.0 * std::clamp(e, 0.0, 1.0)));
    };
    constexpr rgb blue{0x00, 0x72, 0xb2}, vermilion{0xd5, 0x5e, 0x00};  // okabe_ito::blue, vermilion
    const double f = std::clamp(fraction, -1.0, 1.0);
    const rgb end = f < 0.0 ? blue : vermilion;
    const double w = std::abs(f);
    auto mix = [&](unsigned char c) { return to_byte((1.0 - w) + w * to_linear(c / 255.0)); };
    return {mix(end.r), mix(end.g), mix(end.b)};
}

std::string hex_colour(rgb c) { return printf_text("#%02x%02x%02x", c.r, c.g, c.b); }

std::string fmt(const char* format, double v) { return printf_text(format, v); }

std::string escape_html(std::string_view text) {
    std::string out;
    out.reserve(text.size());
    for (char ch : text) {
        switch (ch) {
            case '<': out += "&lt;"; break;
            case '>': out += "&gt;"; break;
            case '&': out += "&amp;"; break;
            case '"': out += "&quot;"; break;
            default: out += ch;
        }
    }
    return out;
}

double tick_step(double span, int target_ticks) {
    const double raw = span / std::max(1, target_ticks);
    const double mag = std::pow(10.0, std::floor(std::log10(raw)));
    for (double m : {1.0, 2.0, 5.0, 10.0}) {
        if (m * mag >= raw) return m * mag;
    }
    return 10.0 * mag;
}

namespace {

constexpr int axis_x_ticks = 8, axis_y_ticks = 6;  // about this many ticks per axis

/// Decimals that show a tick step exactly (0.5 -> 1, 0.05 -> 2, 200 -> 0).
int tick_decimals(double step) { return std::max(0, static_cast<int>(-std::floor(std::log10(step) + 1e-9))); }

std::string tick_text(double v, double step) {
    return printf_text("%.*f", tick_decimals(step), std::abs(v) < 1e-9 * step ? 0.0 : v);
}

}  // namespace

std::string svg_axes(const plot_frame& f, const std::string& x_label, const std::string& y_label) {
    std::ostringstream o;
    const double bottom = f.height - f.bottom;
    o << "<rect x='" << f.left << "' y='" << f.top << "' width='" << (f.width - f.left - f.right)
      << "' height='" << (bottom - f.top) << "' fill='none' stroke='#444'/>";
    const double xs = tick_step(f.x1 - f.x0, axis_x_ticks);
    const long x_first = std::lround(std::ceil(f.x0 / xs - 1e-9));
    const long x_last = std::lround(std::floor(f.x1 / xs + 1e-9));
    for (long i = x_first; i <= x_last; ++i) {
        const double x = static_cast<double>(i) * xs;
        o << "<line x1='" << f.px(x) << "' x2='" << f.px(x) << "' y1='" << bottom << "' y2='" << bottom + 5
          << "' stroke='#444'/><text x='" << f.px(x) << "' y='" << bottom + 19 << "' text-anchor='middle'>"
          << tick_text(x, xs) << "</text>";
    }
    auto y_tick = [&](double y, const std::string& text) {
        o << "<line x1='" << f.left - 5 << "' x2='" << f.left << "' y1='" << f.py(y) << "' y2='" << f.py(y)
          << "' stroke='#444'/><text x='" << f.left - 8 << "' y='" << f.py(y) + 4.5 << "' text-anchor='end'>"
          << text << "</text>";
    };
    if (f.log_y) {
        const long first = std::lround(std::floor(std::log10(f.y0))), last = std::lround(std::ceil(std::log10(f.y1)));
        for (long e = first; e <= last; ++e) {
            for (const double m : {1.0, 2.0, 5.0}) {
                const double y = m * std::pow(10.0, static_cast<double>(e));
                if (y >= f.y0 && y <= f.y1) y_tick(y, printf_text("%g", y));
            }
        }
    } else {
        const double ys = tick_step(f.y1 - f.y0, axis_y_ticks);
        const long y_first = std::lround(std::ceil(f.y0 / ys - 1e-9));
        const long y_last = std::lround(std::floor(f.y1 / ys + 1e-9));
        for (long i = y_first; i <= y_last; ++i) y_tick(static_cast<double>(i) * ys, tick_text(static_cast<double>(i) * ys, ys));
    }
    o << "<text x='" << (f.left + f.width - f.right) / 2 << "' y='" << f.height - 6 << "' text-anchor='middle'>"
      << escape_html(x_label) << "</text><text transform='translate(15," << (f.top + bottom) / 2
      << ") rotate(-90)' text-anchor='middle'>" << escape_html(y_label) << "</text>";
    return o.str();
}

}  // namespace wane::report_plot

// The unweighted least-squares straight line y = a + b x through points (x, y), from running sums:
// the one home of that formula for levels in dB against time (a slope in dB/s).
//
//   b = (Sxy - Sx Sy / n) / (Sxx - Sx^2 / n),   a = (Sy - b Sx) / n
//
// with n points, Sx = sum x, Sy = sum y, Sxx = sum x^2, Sxy = sum x y (the normal equations of
// the two unknowns solved in closed form). Sums in double, added in the order the points come.
// Shifting x by a constant (times from a segment's start rather than the note's) changes b only
// by rounding; keep x small where many points sit far from zero. Checked by test_line_fit.
#pragma once

#include <optional>

namespace wane {

struct line_sums {
    double n = 0.0;   ///< points added
    double x = 0.0;   ///< sum of x
    double y = 0.0;   ///< sum of y
    double xx = 0.0;  ///< sum of x^2
    double xy = 0.0;  ///< sum of x y

    void add(double px, double py) { n += 1.0, x += px, y += py, xx += px * px, xy += px * py; }

    /// Sxx - Sx^2 / n: n times the variance of x (0 with fewer than two distinct x).
    [[nodiscard]] double x_spread() const { return n > 0.0 ? xx - x * x / n : 0.0; }

    /// b, units of y per unit of x; nullopt with fewer than min_points points or no spread of x.
    [[nodiscard]] std::optional<double> slope(double min_points = 2.0) const {
        if (n < min_points) return std::nullopt;
        const double spread = x_spread();
        if (!(spread > 0.0)) return std::nullopt;
        return (xy - x * y / n) / spread;
    }

    /// a for a given slope b (the line through the points' mean): (Sy - b Sx) / n.
    [[nodiscard]] double intercept(double b) const { return (y - b * x) / n; }
};

}  // namespace wane

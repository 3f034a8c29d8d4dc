// sin and cos of one angle together, branch-free, for loops over many angles that the compiler can
// vectorize (the library's sin and cos are a call each, with branches on the argument's size).
//
// x = k pi/2 + r, |r| <= pi/4 (k rounded to nearest; pi/2 in three parts, Cody and Waite 1980, so r
// keeps its digits for |x| up to about 1e6), then the odd and even minimax polynomials of sin and
// cos on [-pi/4, pi/4] (the coefficients of fdlibm's __kernel_sin and __kernel_cos, Sun
// Microsystems 1993; their error under 2^-58 there) and the quadrant k mod 4. Error: a few units
// in the last place of 1 (|x| <= 1e6, asserted by the caller's use, not here: no branch).
#pragma once

#include <cstdint>

namespace wane {

/// sin(x) and cos(x) for |x| <= 1e6 (absolute error under 1e-15).
inline void sincos_poly(double x, double& sin_out, double& cos_out) {
    constexpr double two_over_pi = 6.36619772367581382433e-01;
    constexpr double pio2_1 = 1.57079632673412561417e+00;   // first 33 bits of pi/2
    constexpr double pio2_2 = 6.07710050630396597660e-11;   // next 33 bits
    constexpr double pio2_3 = 2.02226624879595063154e-21;   // pi/2 - pio2_1 - pio2_2
    constexpr double round_shift = 6755399441055744.0;      // 1.5 * 2^52: adding it rounds to an integer
    const double k = (x * two_over_pi + round_shift) - round_shift;
    const double r = ((x - k * pio2_1) - k * pio2_2) - k * pio2_3;
    const double z = r * r;
    const double s = r + r * z * (-1.66666666666666324348e-01 +
                                  z * (8.33333333332248946124e-03 +
                                       z * (-1.98412698298579493134e-04 +
                                            z * (2.75573137070700676789e-06 +
                                                 z * (-2.50507602534068634195e-08 + z * 1.58969099521155010221e-10)))));
    const double c = 1.0 - 0.5 * z +
                     z * z * (4.16666666666666019037e-02 +
                              z * (-1.38888888888741095749e-03 +
                                   z * (2.48015872894767294178e-05 +
                                        z * (-2.75573143513906633035e-07 +
                                             z * (2.08757232129817482790e-09 + z * -1.13596475577881948265e-11)))));
    // The quadrant: x = k pi/2 + r gives (sin, cos) = (s, c), (c, -s), (-s, -c), (-c, s) for k mod 4.
    const auto q = static_cast<std::int32_t>(k) & 3;
    const bool swap = (q & 1) != 0;
    const double sin_abs = swap ? c : s;
    const double cos_abs = swap ? s : c;
    sin_out = (q & 2) != 0 ? -sin_abs : sin_abs;
    cos_out = (q == 1 || q == 2) ? -cos_abs : cos_abs;
}

}  // namespace wane

// One damped sinusoid fitted by least squares on a residual, for a few decays at once: what the
// early companions (analysis/early_companion.hpp) and the early twins (analysis/early_twin.hpp)
// fit on what the copy leaves of a recording's first 150 ms.
#pragma once

#include <complex>
#include <cstddef>
#include <span>
#include <vector>

namespace wane {

struct patch;

/// The partials of p alone (no noise bands) over its first count frames at rate_hz, the note's gain
/// included, as the renderer plays them: p's header and partials rendered with a length that runs
/// 2 end_fade_s past the span, so the render's end fade falls outside it. The copy the early
/// companions and twins fit against.
std::vector<float> render_copy_start(const patch& p, double rate_hz, std::size_t count);

/// cos and sin of omega n for n in [0, count): core/cosine_walk_table's walk with its 16-step
/// stretches' anchors walked too, exact every 256th (decaying_fit.cpp; within 1e-13 of the exact
/// values for omega n up to 1e5, test_early_companion).
void phasor_table(double omega, std::size_t count, std::vector<double>& cos_n, std::vector<double>& sin_n);

struct one_mode_fit {
    std::complex<double> amp{};  ///< complex amplitude at n = 0
    double explained = 0.0;      ///< energy the mode takes off the residual
};

/// Decays fitted in one pass over the samples; even.
inline constexpr std::size_t fit_lanes = 6;

/// Least squares of Re(amp exp(rho n) exp(i omega n)) = Ar u[n] + Ai v[n], u = e cos, v = -e sin,
/// e = exp(rho n), on a residual r (cos_n, sin_n: cos and sin of omega n, omega in rad/sample), for
/// up to fit_lanes decays rho (1/sample, < 0) at once; fits[j] for rho[j].
void fit_decaying(std::span<const double> r, std::span<const double> cos_n, std::span<const double> sin_n, double omega,
                  std::span<const double> rho, std::span<one_mode_fit> fits);

}  // namespace wane

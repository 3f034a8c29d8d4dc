// One damped sinusoid fitted by least squares on a residual, for a few decays at once: what the
// early companions (analysis/early_companion.hpp) and the early twins (analysis/early_twin.hpp)
// fit on what the copy leaves of a recording's first 150 ms.
#pragma once

#include <complex>
#include <cstddef>
#include <memory>
#include <span>
#include <vector>

namespace wane {

struct patch;
class partial_renderer;

/// The partials of p alone (no noise bands) over its first count frames at rate_hz, the note's gain
/// included, as the renderer plays them: p's header and partials rendered with a length that runs
/// 2 end_fade_s past the span, so the render's end fade falls outside it. The copy the early
/// companions and twins fit against.
std::vector<float> render_copy_start(const patch& p, double rate_hz, std::size_t count);

/// render_copy_start's render made a stretch at a time, as its frames are first asked for (each
/// stretch from a multiple of render_anchor_frames: the same bits as the render made whole), for a
/// stage that reads the frames past its span only now and then (the early twins' late band test).
class copy_start_render {
public:
    copy_start_render(const patch& p, double rate_hz, std::size_t count);
    ~copy_start_render();
    copy_start_render(const copy_start_render&) = delete;
    copy_start_render& operator=(const copy_start_render&) = delete;
    /// The render's count frames with at least the first `frames` (<= count) made, the others unset;
    /// the caller may change the frames made (they are not made again).
    std::vector<float>& at_least(std::size_t frames);

private:
    std::unique_ptr<const partial_renderer> renderer_;
    std::vector<float> samples_;
    std::size_t made_ = 0;  ///< frames [0, made_) made
};

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

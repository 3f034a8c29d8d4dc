// One damped sinusoid by least squares on a residual (see decaying_fit.hpp).
#include "analysis/decaying_fit.hpp"

#include <array>
#include <cassert>
#include <cmath>
#include <complex>
#include <memory>
#include <vector>

#include "core/cosine_walk.hpp"
#include "core/patch.hpp"
#include "core/units.hpp"
#include "synthesis/kernel_clones.hpp"
#include "synthesis/render.hpp"

namespace wane {

namespace {

/// The renderer of render_copy_start's render: p's header and partials, its length 2 end_fade_s past
/// count frames (the render's end fade falls outside them).
std::unique_ptr<const partial_renderer> copy_renderer(const patch& p, double rate_hz, std::size_t count) {
    patch one{.version = p.version, .note = p.note, .source = p.source, .partials = p.partials, .noise = {}};
    one.note.length_s = static_cast<double>(count) / rate_hz + 2.0 * end_fade_s;  // its fade past the span
    return std::make_unique<const partial_renderer>(one, render_params{.sample_rate_hz = rate_hz, .include_noise = false});
}

}  // namespace

std::vector<float> render_copy_start(const patch& p, double rate_hz, std::size_t count) {
    std::vector<float> y(count);
    copy_renderer(p, rate_hz, count)->render(0, y);
    return y;
}

copy_start_render::copy_start_render(const patch& p, double rate_hz, std::size_t count)
    : renderer_(copy_renderer(p, rate_hz, count)), samples_(count) {}

copy_start_render::~copy_start_render() = default;

std::vector<float>& copy_start_render::at_least(std::size_t frames) {
    assert(frames <= samples_.size());
    if (frames > made_) {
        // Up to the next multiple of render_anchor_frames (the next stretch starts at one).
        const std::size_t to = std::min(samples_.size(), (frames + render_anchor_frames - 1) / render_anchor_frames * render_anchor_frames);
        renderer_->render(made_, std::span(samples_).subspan(made_, to - made_));
        made_ = to;
    }
    return samples_;
}

namespace {

/// cos and sin of omega n into cos_n and sin_n (count each): cosine_walk_table's walk, four
/// 16-step stretches side by side, each stretch from its anchor rotated on by one step of omega,
/// but the anchors themselves walked: exact (std::cos, std::sin) at every multiple of
/// exact_anchor_every, between them each rotated on from the one before by 16 omega. A std::sin
/// and std::cos pair cost 140 instructions a stretch, most of the table's work; the walked anchors
/// stay within a few ulps times the 16 steps between exact ones. Compiled for AVX2 (the four
/// stretches in one register) and the baseline (no FMA: the same bits).
constexpr std::size_t exact_anchor_every = 256;
WANE_KERNEL_CLONES
void walk_table(double omega, double* cos_n, double* sin_n, std::size_t count) {
    using lanes = double __attribute__((vector_size(32)));
    constexpr std::size_t stretch = cosine_walk::exact_every, width = 4 * stretch;
    static_assert(exact_anchor_every % width == 0);
    const double cos_step = std::cos(omega), sin_step = std::sin(omega);
    const double cos_jump = std::cos(omega * static_cast<double>(stretch)), sin_jump = std::sin(omega * static_cast<double>(stretch));
    double ac = 1.0, as = 0.0;  // the anchor of the next stretch
    std::size_t from = 0;
    for (; from + width <= count; from += width) {
        lanes c, s;
        for (std::size_t l = 0; l < 4; ++l) {
            const std::size_t at = from + l * stretch;
            if (at % exact_anchor_every == 0) {
                const double angle = omega * static_cast<double>(at);
                ac = std::cos(angle), as = std::sin(angle);
            }
            c[l] = ac, s[l] = as;
            cosine_walk::rotate_on(ac, as, cos_jump, sin_jump);
        }
        for (std::size_t t = 0;; ++t) {
            for (std::size_t l = 0; l < 4; ++l) cos_n[from + l * stretch + t] = c[l], sin_n[from + l * stretch + t] = s[l];
            if (t + 1 == stretch) break;
            cosine_walk::rotate_on(c, s, cos_step, sin_step);
        }
    }
    double c = ac, s = as;
    for (std::size_t j = from; j < count; ++j) {
        if (j % exact_anchor_every == 0) {
            const double angle = omega * static_cast<double>(j);
            c = std::cos(angle), s = std::sin(angle);
        } else if (j > from) {
            cosine_walk::rotate_on(c, s, cos_step, sin_step);
        }
        cos_n[j] = c, sin_n[j] = s;
    }
}

static_assert(fit_lanes % 2 == 0);

/// sum over n in [0, count) of z^n (a geometric series; |z| <= 1, z != 1).
std::complex<double> geometric_sum(std::complex<double> z, std::size_t count) {
    const double n = static_cast<double>(count);
    const std::complex<double> z_n = std::polar(std::pow(std::abs(z), n), std::remainder(std::arg(z) * n, two_pi));
    return (1.0 - z_n) / (1.0 - z);
}

/// Four doubles side by side (GCC/Clang vector extension): one AVX register, two SSE2 ones.
using lanes = double __attribute__((vector_size(32)));

/// ru[j] = sum_n e_j[n] rc[n] and rv[j] = sum_n e_j[n] rs[n] over n in [0, count), rc = r cos_n,
/// rs = -r sin_n, e_j[n] = step[j]^n stepped by one product a sample (0 throughout where step[j]
/// is 0), for the fit_lanes decays: the pair (ru, rv) of two decays in one vector, each sum over n
/// in order (a multiply, then an add). Compiled for AVX2 and the baseline (no FMA, the same bits).
WANE_KERNEL_CLONES
void decaying_sums(const double* __restrict r, const double* __restrict cos_n, const double* __restrict sin_n,
                   std::size_t count, const double* __restrict step, double* __restrict ru, double* __restrict rv) {
    constexpr std::size_t vectors = fit_lanes / 2;
    std::array<lanes, vectors> e{}, ratio{}, acc{};
    for (std::size_t k = 0; k < vectors; ++k) {
        const double a = step[2 * k], b = step[2 * k + 1];
        ratio[k] = lanes{a, a, b, b};
        e[k] = lanes{a > 0.0 ? 1.0 : 0.0, a > 0.0 ? 1.0 : 0.0, b > 0.0 ? 1.0 : 0.0, b > 0.0 ? 1.0 : 0.0};
    }
    for (std::size_t n = 0; n < count; ++n) {
        const double rc = r[n] * cos_n[n], rs = -r[n] * sin_n[n];
        const lanes x{rc, rs, rc, rs};
        for (std::size_t k = 0; k < vectors; ++k) {
            acc[k] += e[k] * x;
            e[k] *= ratio[k];
        }
    }
    for (std::size_t k = 0; k < vectors; ++k)
        ru[2 * k] = acc[k][0], rv[2 * k] = acc[k][1], ru[2 * k + 1] = acc[k][2], rv[2 * k + 1] = acc[k][3];
}

}  // namespace

void phasor_table(double omega, std::size_t count, std::vector<double>& cos_n, std::vector<double>& sin_n) {
    cos_n.resize(count);
    sin_n.resize(count);
    walk_table(omega, cos_n.data(), sin_n.data(), count);
}

/// Least squares of Re(amp exp(rho n) exp(i omega n)) = Ar u[n] + Ai v[n], u = e cos, v = -e sin,
/// e = exp(rho n), on a residual r (cos_n, sin_n: cos and sin of omega n), for up to fit_lanes
/// decays rho (1/sample, < 0) at once. The right-hand sides sum e r cos and -e r sin sample by
/// sample (decaying_sums); the Gram entries are geometric series in closed form: with
/// a = exp(2 rho), g = sum a^n, h = sum (a exp(2 i omega))^n, uu = (g + Re h) / 2,
/// vv = (g - Re h) / 2, uv = -Im h / 2. The energy explained is theta . rhs. fits[j] for rho[j].
void fit_decaying(std::span<const double> r, std::span<const double> cos_n, std::span<const double> sin_n, double omega,
                  std::span<const double> rho, std::span<one_mode_fit> fits) {
    assert(rho.size() <= fit_lanes && fits.size() == rho.size() && cos_n.size() == r.size() && sin_n.size() == r.size());
    std::array<double, fit_lanes> step{}, ru{}, rv{};  // an unused lane (step 0) sums nothing
    for (std::size_t j = 0; j < rho.size(); ++j) step[j] = std::exp(rho[j]);
    decaying_sums(r.data(), cos_n.data(), sin_n.data(), r.size(), step.data(), ru.data(), rv.data());
    for (std::size_t j = 0; j < rho.size(); ++j) {
        const double a = std::exp(2.0 * rho[j]);
        const double g = geometric_sum(a, r.size()).real();
        const std::complex<double> h = geometric_sum(std::polar(a, 2.0 * omega), r.size());
        const double uu = 0.5 * (g + h.real()), vv = 0.5 * (g - h.real()), uv = -0.5 * h.imag();
        const double det = uu * vv - uv * uv;
        if (!(uu > 0.0) || !(det > 1e-12 * uu * vv)) {
            fits[j] = {};
            continue;
        }
        const double ar = (vv * ru[j] - uv * rv[j]) / det, ai = (uu * rv[j] - uv * ru[j]) / det;
        fits[j] = {.amp = {ar, ai}, .explained = ar * ru[j] + ai * rv[j]};
    }
}

}  // namespace wane

#include "modes/mode_projection.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <complex>
#include <type_traits>
#include <vector>

#include <Eigen/Dense>

#include "core/units.hpp"
#include "synthesis/kernel_clones.hpp"

namespace wane {

namespace {

/// Doubles side by side (GCC/Clang vector extension) for G chains (G <= 4): two lanes at least (one
/// double is no vector); a lane past G stays 0 and is never read.
using two_lanes = double __attribute__((vector_size(16)));
using four_lanes = double __attribute__((vector_size(32)));
template <std::size_t G>
using chain_lanes = std::conditional_t<(G > 2), four_lanes, two_lanes>;

/// project_group for exactly G modes: the complex products written out on real and imaginary
/// parts (the same products and sums as std::complex's), the G chains side by side in one vector
/// (each lane's arithmetic its own, as written). Sample is float or double: a float sample is
/// widened exactly, so both give the same sums.
template <std::size_t G, typename Sample>
[[gnu::always_inline]] inline void project_chains(std::span<const Sample> w, std::span<const std::size_t> which,
                                                  std::span<const double> rho, std::span<const double> omega,
                                                  std::span<std::complex<double>> out) {
    constexpr std::size_t anchor = 512;
    using lanes = chain_lanes<G>;
    lanes zr{}, zi{}, pr{}, pi_{}, accr{}, acci{};
    for (std::size_t i = 0; i < G; ++i) {
        const std::complex<double> z = std::exp(std::complex<double>{rho[which[i]], omega[which[i]]});
        zr[i] = z.real(), zi[i] = z.imag();
    }
    for (std::size_t start = 0; start < w.size(); start += anchor) {
        const std::size_t end = std::min(w.size(), start + anchor);
        const auto at = static_cast<double>(start);
        for (std::size_t i = 0; i < G; ++i) {
            const std::complex<double> p = std::exp(std::complex<double>{rho[which[i]] * at, std::remainder(omega[which[i]] * at, two_pi)});
            pr[i] = p.real(), pi_[i] = p.imag();
        }
#pragma GCC unroll 2
        for (std::size_t n = start; n < end; ++n) {
            const auto wn = static_cast<double>(w[n]);
            accr += wn * pr;
            acci += wn * pi_;
            const lanes next_r = pr * zr - pi_ * zi;
            pi_ = pr * zi + pi_ * zr;
            pr = next_r;
        }
    }
    for (std::size_t i = 0; i < G; ++i) out[which[i]] = {accr[i], acci[i]};
}

/// project_chains for G = 1 or 2 with each chain's complex numbers side by side, [re, im] per
/// chain: p z as p * [z_re, z_re] + [p_im, p_re] * [-z_im, z_im]. The same bits as
/// project_chains's: pr zr + pi (-zi) is pr zr - pi zi (a negated product is exact, and x + (-y)
/// is x - y), and pi zr + pr zi is pr zi + pi zr (IEEE addition commutes); a third fewer
/// instructions per sample than a chain per lane, where one or two chains left half the lanes idle.
template <std::size_t G, typename Sample>
[[gnu::always_inline]] inline void project_paired(std::span<const Sample> w, std::span<const std::size_t> which,
                                                  std::span<const double> rho, std::span<const double> omega,
                                                  std::span<std::complex<double>> out) {
    static_assert(G == 1 || G == 2);
    constexpr std::size_t anchor = 512;
    using lanes = chain_lanes<2 * G>;
    lanes z_same{}, z_cross{}, p{}, acc{};
    for (std::size_t i = 0; i < G; ++i) {
        const std::complex<double> z = std::exp(std::complex<double>{rho[which[i]], omega[which[i]]});
        z_same[2 * i] = z.real(), z_same[2 * i + 1] = z.real();
        z_cross[2 * i] = -z.imag(), z_cross[2 * i + 1] = z.imag();
    }
    for (std::size_t start = 0; start < w.size(); start += anchor) {
        const std::size_t end = std::min(w.size(), start + anchor);
        const auto at = static_cast<double>(start);
        for (std::size_t i = 0; i < G; ++i) {
            const std::complex<double> a = std::exp(std::complex<double>{rho[which[i]] * at, std::remainder(omega[which[i]] * at, two_pi)});
            p[2 * i] = a.real(), p[2 * i + 1] = a.imag();
        }
#pragma GCC unroll 2
        for (std::size_t n = start; n < end; ++n) {
            const auto wn = static_cast<double>(w[n]);
            acc += wn * p;
            lanes swapped;  // each pair's two lanes swapped: [p_im, p_re]
            if constexpr (G == 1) {
                swapped = __builtin_shufflevector(p, p, 1, 0);
            } else {
                swapped = __builtin_shufflevector(p, p, 1, 0, 3, 2);
            }
            p = p * z_same + swapped * z_cross;
        }
    }
    for (std::size_t i = 0; i < G; ++i) out[which[i]] = {acc[2 * i], acc[2 * i + 1]};
}

template <typename Sample>
[[gnu::always_inline]] inline void project_group_of(std::span<const Sample> w, std::span<const std::size_t> which,
                                                    std::span<const double> rho, std::span<const double> omega,
                                                    std::span<std::complex<double>> out) {
    const std::size_t g = which.size();
    assert(g <= projection_group);
    static_assert(projection_group == 4);
    // Every size its own chains in one pass (each chain's arithmetic is the same at any G).
    switch (g) {
        case 4: project_chains<4>(w, which, rho, omega, out); break;
        case 3: project_chains<3>(w, which, rho, omega, out); break;
        case 2: project_paired<2>(w, which, rho, omega, out); break;
        case 1: project_paired<1>(w, which, rho, omega, out); break;
        default: break;
    }
}

}  // namespace

// The entry points compiled for AVX2 (four chains in one register) and the baseline (no FMA: the same bits).
WANE_KERNEL_CLONES
void project_group(std::span<const double> w, std::span<const std::size_t> which, std::span<const double> rho,
                   std::span<const double> omega, std::span<std::complex<double>> out) {
    project_group_of(w, which, rho, omega, out);
}


WANE_KERNEL_CLONES
void project_modes(std::span<const float> x, std::size_t count, std::span<const double> rho,
                   std::span<const double> omega, std::span<std::complex<double>> out) {
    assert(count <= x.size());
    const std::span<const float> w = x.first(count);  // read as floats: no copy of the samples
    std::array<std::size_t, projection_group> which{};
    for (std::size_t k = 0; k < rho.size(); k += projection_group) {
        const std::size_t g = std::min(projection_group, rho.size() - k);
        for (std::size_t i = 0; i < g; ++i) which[i] = k + i;
        project_group_of(w, std::span(which).first(g), rho, omega, out);
    }
}

void project_blocked(std::span<const double> w, std::span<const std::size_t> which, std::span<const double> rho,
                     std::span<const double> omega, std::span<std::complex<double>> out) {
    constexpr Eigen::Index block = 64;  // B
    const auto k_count = static_cast<Eigen::Index>(which.size());
    const auto count = static_cast<Eigen::Index>(w.size());
    if (k_count == 0) return;
    const Eigen::Index blocks = (count + block - 1) / block;
    Eigen::MatrixXd samples = Eigen::MatrixXd::Zero(blocks, block);  // W
    for (Eigen::Index n = 0; n < count; ++n) samples(n / block, n % block) = w[static_cast<std::size_t>(n)];
    Eigen::MatrixXd z_re(block, k_count), z_im(block, k_count);
    for (Eigen::Index k = 0; k < k_count; ++k) {
        const std::size_t mode = which[static_cast<std::size_t>(k)];
        const std::complex<double> z = std::exp(std::complex<double>{rho[mode], omega[mode]});
        std::complex<double> p{1.0, 0.0};
        for (Eigen::Index m = 0; m < block; ++m) {
            z_re(m, k) = p.real(), z_im(m, k) = p.imag();
            p *= z;
        }
    }
    const Eigen::MatrixXd y_re = samples * z_re, y_im = samples * z_im;  // blocks x K
    const auto step_n = static_cast<double>(block);
    for (Eigen::Index k = 0; k < k_count; ++k) {
        const std::size_t mode = which[static_cast<std::size_t>(k)];
        const std::complex<double> step = std::exp(std::complex<double>{rho[mode] * step_n, std::remainder(omega[mode] * step_n, two_pi)});
        std::complex<double> at{}, acc{};
        for (Eigen::Index b = 0; b < blocks; ++b) {
            if (b % 16 == 0) {
                const double n = static_cast<double>(b) * step_n;
                at = std::exp(std::complex<double>{rho[mode] * n, std::remainder(omega[mode] * n, two_pi)});
            }
            acc += at * std::complex<double>{y_re(b, k), y_im(b, k)};
            at *= step;
        }
        out[mode] = acc;
    }
}

void project_many(std::span<const float> x, std::span<const double> rho, std::span<const double> omega,
                  std::span<std::complex<double>> out) {
    if (rho.size() < block_projection_min_modes) {
        project_modes(x, x.size(), rho, omega, out);
        return;
    }
    const std::vector<double> w(x.begin(), x.end());
    std::vector<std::size_t> all(rho.size());
    for (std::size_t k = 0; k < all.size(); ++k) all[k] = k;
    project_blocked(w, all, rho, omega, out);
}

}  // namespace wane

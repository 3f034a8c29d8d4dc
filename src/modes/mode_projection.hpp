// Projections of samples on damped phasors, sum_n w[n] exp(n (rho_k + i omega_k)), several modes
// per pass over the samples: the inner loop of the least-squares fits of modes/damped_mode.cpp.
#pragma once

#include <complex>
#include <cstddef>
#include <span>

namespace wane {

/// Modes projected together in one pass over x: independent phasor chains the processor can
/// overlap (each mode's arithmetic is the same as alone).
inline constexpr std::size_t projection_group = 4;

/// sum_n w[n] p_k[n] for the modes in `which` (at most projection_group), p_k[n] = exp(n (rho_k +
/// i w_k)), the phasors re-anchored from the exact power every 512 samples; written to out[k].
void project_group(std::span<const double> w, std::span<const std::size_t> which, std::span<const double> rho,
                   std::span<const double> omega, std::span<std::complex<double>> out);

/// P_k = sum_{n < count} x[n] z_k^n for every mode k (z_k = exp(rho_k + i omega_k)) into out[k]
/// (out.size() >= rho.size()), by project_group's chains in groups, reading x's floats in place
/// (the same sums as on a double copy: a float widens exactly).
void project_modes(std::span<const float> x, std::size_t count, std::span<const double> rho,
                   std::span<const double> omega, std::span<std::complex<double>> out);

/// project_group's sums for many modes at once, by matrix products over blocks of B samples:
/// with W(b, m) = w[b B + m] (0 past the end) and Z(m, k) = z_k^m (m < B),
///   P_k = sum_b z_k^(b B) (W Z)(b, k),
/// two real products (Re Z, Im Z) of O(N K) at the speed of a matrix product instead of one
/// phasor chain per mode; z^m by products over m < B, z^(bB) by products of z^B re-anchored from
/// the exact power every 16 blocks. The same sums up to rounding (a different order of additions,
/// which also depends on how many modes go with it: not for the fits' memo, modes/fit_memo.hpp,
/// which copies a mode's projection from one fit to the next). Worth it from about
/// block_projection_min_modes modes on.
inline constexpr std::size_t block_projection_min_modes = 16;
void project_blocked(std::span<const double> w, std::span<const std::size_t> which, std::span<const double> rho,
                     std::span<const double> omega, std::span<std::complex<double>> out);

/// project_modes's sums over all of x (count = x.size()) for every mode: project_blocked from
/// block_projection_min_modes modes on (on a double copy of x), else project_modes.
void project_many(std::span<const float> x, std::span<const double> rho, std::span<const double> omega,
                  std::span<std::complex<double>> out);

}  // namespace wane

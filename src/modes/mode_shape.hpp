// The amplitude of a mode over the samples of a fit, in closed-form pieces, so that sums of
// products of two modes over thousands of samples cost a few operations (modes/damped_mode.hpp).
//
// A piece is  a[n] = scale * n^power * exp(rho (n - start))  for n in [start, start + count),
// n counting samples from t = 0; a shape is a list of pieces over disjoint ranges (a[n] = 0
// elsewhere). A decaying mode is one piece (rho = -decay / fs); a patch envelope is its attack
// ramp (power 1: linear in n) and one exponential piece per straight dB segment.
#pragma once

#include <complex>
#include <cstddef>
#include <vector>

#include "core/envelope.hpp"

namespace wane {

struct shape_piece {
    std::size_t start = 0;
    std::size_t count = 0;
    double scale = 1.0;
    double rho = 0.0;  ///< natural log of the ratio from one sample to the next
    int power = 0;     ///< 0 or 1 in a shape; products of two pieces reach 2
};

using mode_shape = std::vector<shape_piece>;

/// exp(rho n) for n in [0, count).
mode_shape exponential_shape(double rho, std::size_t count);

/// The linear amplitude of env (core/envelope.hpp: attack ramp, then straight dB segments) at
/// t = n / sample_rate_hz for n in [0, count), as pieces.
mode_shape envelope_shape(const envelope& env, double sample_rate_hz, std::size_t count);

/// sum_n a[n] b[n] exp(lambda n) over all n (lambda complex; the sum is over the ranges where
/// both shapes have pieces). Closed forms for the power 0 and 1 products (geometric series and its
/// derivatives, stable as lambda -> 0).
std::complex<double> shape_pair_sum(const mode_shape& a, const mode_shape& b, std::complex<double> lambda);

/// a[n] for n in [0, count) into out (zero where a has no piece).
void shape_samples(const mode_shape& a, std::size_t count, std::vector<double>& out);

/// sum_{m=0}^{count-1} m^power exp(m mu), power 0, 1 or 2; exact as mu -> 0 (a power series there).
std::complex<double> moment_geometric_sum(int power, std::complex<double> mu, double count);

}  // namespace wane

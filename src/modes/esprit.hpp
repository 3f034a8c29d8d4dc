// Poles of a sum of damped complex exponentials by ESPRIT (Roy and Kailath 1989), the order by the
// gap between signal and noise eigenvalues of the sample covariance.
//
// For y[n] = sum_k c_k z_k^n + noise, n = 0 .. N-1, the L x M data matrix Y with columns
// y[m .. m+L-1] (M = N - L + 1) has its signal part in the span of the Vandermonde vectors
// [1, z_k, .., z_k^(L-1)]. The r leading eigenvectors U of R = Y Y^H (L x L, Hermitian) span it;
// with U1 = U without its last row and U2 = U without its first, Phi = pinv(U1) U2 is similar to
// diag(z_k), so the poles are the eigenvalues of Phi (r x r). Cost: O(L^2 N) for R, O(L^3) for
// the eigenvectors, O(r^3) for Phi: small when the signal is a decimated subband.
#pragma once

#include <complex>
#include <span>
#include <vector>

namespace wane {

struct esprit_params {
    int dimension = 40;   ///< L, rows of the data matrix (caps the order at L - 1); shrunk to N / 3
    int max_order = 24;   ///< largest r
    /// An eigenvalue of R counts as signal when it exceeds this factor times the noise eigenvalue
    /// level (the median of the smaller half of the eigenvalues).
    double signal_over_noise = 10.0;
    /// ... and is within this ratio (dB) of the largest eigenvalue (the dynamic range kept).
    double range_db = 80.0;
    /// When > 0, exactly this order (no selection).
    int fixed_order = 0;
};

/// The poles z_k (complex, |z| < 1 for a decaying mode) of y, strongest subspace first; empty
/// when y is too short (fewer than 9 samples) or holds no signal.
std::vector<std::complex<double>> esprit_poles(std::span<const std::complex<double>> y, const esprit_params& params);

/// esprit_poles of y with fixed_order 1 .. max_order (the given dimension) from one
/// eigen-decomposition and one set of eigenvectors: entry r - 1 holds order r's poles, those of
/// esprit_poles(y, {.dimension = dimension, .max_order = r, .fixed_order = r}) up to rounding (the
/// eigenvectors formed column by column), all empty where that is empty.
std::vector<std::vector<std::complex<double>>> esprit_poles_by_order(std::span<const std::complex<double>> y,
                                                                     int dimension, int max_order);

}  // namespace wane

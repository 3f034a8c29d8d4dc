// Eigenvalues (no vectors) of a small general complex matrix, for ESPRIT's rotation (r x r,
// r <= 24 on the subband problems): Householder reduction to upper Hessenberg form
// (modes/hessenberg_reduction: Eigen's HessenbergDecomposition, bit for bit), then
// single-shift QR steps by Givens rotations (Francis 1961), the shift the eigenvalue of the
// active block's trailing 2 x 2 nearer its last diagonal entry (Wilkinson 1965), an exceptional
// shift after 10 and 20 steps on one eigenvalue (EISPACK's comqr, Smith et al. 1976).
//
// The steps, deflation test and shifts are those of Eigen's ComplexSchur, so the eigenvalues are
// the ones Eigen's ComplexEigenSolver gives up to rounding (the plane rotations are formed by a
// formula of their own, c = |p| / sqrt(|p|^2 + |q|^2) >= 0, not by Eigen's makeGivens, whose c
// and s may differ in sign and last bits); each rotation is applied only within the active block
// (the rows above it and the columns to its right hold the Schur form's off-diagonal part, which
// the eigenvalues never read), and on plain real and imaginary parts, the rotation's cosine being
// real.
#pragma once

#include <complex>
#include <cstddef>
#include <span>
#include <vector>

namespace wane {

/// The n eigenvalues of the n x n matrix a (column-major, a.size() == n * n), ascending in
/// magnitude (as Eigen's ComplexEigenSolver orders them). Empty when the QR steps do not converge
/// within 30 steps per row (Eigen's limit) or a holds a non-finite value.
std::vector<std::complex<double>> complex_eigenvalues(std::span<const std::complex<double>> a, std::size_t n);

}  // namespace wane

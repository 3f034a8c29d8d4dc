// Householder tridiagonalization of a small Hermitian matrix, R = Q T Q^H with T real symmetric
// tridiagonal, and Q applied to a real matrix: the first and last steps of the eigenvectors of an
// ESPRIT covariance (modes/esprit.cpp), in place of Eigen's Tridiagonalization and its Householder
// sequence. The steps are LAPACK's zhetd2 (lower) with zlarfg's reflectors; the matrix's lower
// triangle is kept as real and imaginary parts, so every update is a multiply-add over a column
// (or, for Q, over a row of columns) that runs side by side.
#pragma once

#include <complex>
#include <cstddef>
#include <vector>

#include <Eigen/Core>

namespace wane {

/// R = Q T Q^H, Q = H_0 H_1 .. H_(n-2), H_k = I - tau_k w_k w_k^H on rows k + 1 .. n - 1, w_k's
/// first entry 1.
struct hermitian_tridiagonal {
    std::size_t n = 0;
    Eigen::VectorXd diag;                    ///< T's diagonal (n)
    Eigen::VectorXd sub;                     ///< T's subdiagonal (n - 1)
    std::vector<std::complex<double>> tau;   ///< n - 1
    std::vector<double> w_re, w_im;          ///< w_k's entries after its 1 at [k n ..] (n - k - 2 of them)
};

/// The tridiagonal form of the Hermitian n x n matrix given by its real and imaginary parts
/// (column-major; only the lower triangle is read), taken by value as work space.
hermitian_tridiagonal tridiagonalize(std::vector<double> a_re, std::vector<double> a_im, std::size_t n);

/// The eigenvalues (ascending, into values) and eigenvectors (the columns of vectors, n x n) of
/// the symmetric tridiagonal matrix (diag, sub): Eigen's SelfAdjointEigenSolver::
/// computeFromTridiagonal step for step (implicit QR steps with Wilkinson's shift, its deflation
/// test and iteration limit, its sort), the rotations gathered into the vectors by a loop of its
/// own (the same products and sums per entry, the entries side by side). False when the steps did
/// not converge.
bool tridiagonal_eigen(Eigen::VectorXd diag, Eigen::VectorXd sub, Eigen::VectorXd& values, Eigen::MatrixXd& vectors);

/// The QR steps of tridiagonal_eigen on (diag, sub), their rotations kept rather than applied: the
/// eigenvectors are V = G_0 G_1 .. (G_t the identity but for [c, s; -s, c] in rows and columns at[t],
/// at[t] + 1), column column[i] of V the vector of values(i).
struct tridiagonal_rotations {
    std::size_t n = 0;
    std::vector<std::size_t> at;
    std::vector<double> c, s;
    std::vector<std::size_t> column;
};

/// tridiagonal_eigen's values, bit for bit, and its rotations (for tridiagonal_vectors). False
/// when the steps did not converge.
bool tridiagonal_values(Eigen::VectorXd diag, Eigen::VectorXd sub, Eigen::VectorXd& values, tridiagonal_rotations& rotations);

/// The eigenvectors of values first .. n - 1 (tridiagonal_values), row-major into out (n rows of
/// `stride` entries: the n - first vectors, then 0 up to a multiple of 4): the rotations applied
/// last to first to those columns of the identity, two rows of the wanted columns each instead of
/// two whole columns (tridiagonal_eigen's to rounding).
void tridiagonal_vectors(const tridiagonal_rotations& rotations, std::size_t first, std::vector<double>& out, std::size_t& stride);

/// Q v for v real, n x cols, row-major in re on entry; on return Q v's real and imaginary parts in
/// re and im (row-major).
void apply_q_in_place(const hermitian_tridiagonal& t, std::size_t cols, std::vector<double>& re, std::vector<double>& im);

/// Q v (n x cols, v real, column-major) as real and imaginary parts, row-major (row r at r cols).
void apply_q(const hermitian_tridiagonal& t, const Eigen::MatrixXd& v, std::vector<double>& out_re,
             std::vector<double>& out_im);

}  // namespace wane

// The Cholesky factor of the modes' least-squares systems (modes/damped_mode.hpp: the Gram
// matrices of fit_shaped_amplitudes, factor_plain_gram and sliding_fit_residuals, up to 2K x 2K
// for K modes), in place: A = L L^T with L lower triangular.
//
// Blocked by columns (block_n at a time, as LAPACK's dpotrf): the block's diagonal part is
// factored column by column, the rows below it solved against that (eight rows at a time in
// four-double lanes, an AVX2 clone and the baseline),
// and the trailing matrix updated by the block's rank-block_n product, lower triangle only. That
// update is nearly all of the work (n^3 / 6 multiply-adds); it runs on modes/tile_products.hpp
// (tiles of four-double lanes, an AVX2 clone and the baseline with the same bits). The result
// equals Eigen's LLT up to rounding (tests/unit/test_cholesky.cpp).
#pragma once

#include <Eigen/Core>

namespace wane {

/// In place: the lower triangle of the symmetric positive definite a (only the lower triangle is
/// read) becomes L with A = L L^T; the strict upper triangle is left as it was. False when a pivot
/// is not positive (a is then partly overwritten), as Eigen::LLT's NumericalIssue.
bool cholesky_in_place(Eigen::Ref<Eigen::MatrixXd> a);

/// In place: b <- L^-1 b for the lower triangle L of l (n x n, a factor of cholesky_in_place) and
/// b (n x any columns): blocked as the factor (each block's rows by forward substitution, the rows
/// below updated by tile_products). Equals Eigen's triangular solve up to rounding.
void solve_lower_in_place(const Eigen::Ref<const Eigen::MatrixXd>& l, Eigen::Ref<Eigen::MatrixXd> b);

}  // namespace wane

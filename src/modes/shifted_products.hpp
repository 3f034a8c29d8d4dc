// ESPRIT's shifted-subspace products W = U1^H U2 (modes/esprit.cpp's rotation): for a basis u
// (dim x r, complex), U1 = u without its last row and U2 = u without its first, so
// W(i, j) = sum_{k < dim - 1} conj(u(k, i)) u(k + 1, j), formed straight from u's rows without
// copying the two blocks into a general matrix product.
#pragma once

#include <Eigen/Core>

namespace wane {

/// W = U1^H U2 (r x r) for u (dim x r), bit for bit the product Eigen 3.4 forms for
/// `u.topRows(dim - 1).adjoint() * u.bottomRows(dim - 1)` on the baseline x86-64 build (SSE2,
/// no FMA). Where that product is Eigen's general matrix product without blocking (r >= 2,
/// dim - 1 + 2 r >= 20, dim - 1 < 48) the sums run here in its order: each of the four real sums
///   rr = sum Re a Re b, ir = sum Im a Re b, ri = sum Re a Im b, ii = sum Im a Im b
/// (a = u(k, i), b = u(k + 1, j); each term a product, then an add) over k in order, for the
/// columns j in whole groups of four split into even k and odd k below the largest multiple of 8
/// (added, then the rest of k), for the other columns in one run; then Re W = rr + ii,
/// Im W = -ir + ri (Eigen's alpha step, 1 times that added to a zeroed result, changes no bit:
/// the sums start at +0, so none is -0).
/// Elsewhere (a vector, or a product small enough for Eigen's coefficient-wise path) Eigen's own.
Eigen::MatrixXcd shifted_inner_products(const Eigen::MatrixXcd& u);

}  // namespace wane

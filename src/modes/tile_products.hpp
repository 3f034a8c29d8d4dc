// Sums of products of two column-major panels, c(i, j) -= sum_k a(i, k) b(j, k), in tiles of
// 8 rows x 6 columns held in four-double lanes: the bulk of the modes' Cholesky factors
// (modes/cholesky.hpp: the trailing update, lower triangle only) and of the subband filter's
// outputs (modes/subband_modes.hpp: segment rows times the bands' tap columns).
//
// Compiled for AVX2 and the baseline (no FMA: the same IEEE operations, the same bits on every
// machine). Each sum runs over k in order in one lane from 0 (a multiply, then an add), then is
// taken off c; Eigen's products sum in other orders, so the results agree with them to rounding.
#pragma once

#include <cstddef>

namespace wane {

/// Rows of a (and of c's tiles) come in multiples of this, columns of b in multiples of product_tile_cols:
/// the panels are padded with zeros up to them.
inline constexpr std::size_t product_tile_rows = 8, product_tile_cols = 6;

struct product_panels {
    const double* a = nullptr;  ///< a(i, k) at a[k * a_rows + i], i < a_rows (padded: a multiple of product_tile_rows)
    std::size_t a_rows = 0;
    const double* b = nullptr;  ///< b(j, k) at b[k * b_rows + j], j < b_rows (padded: a multiple of product_tile_cols)
    std::size_t b_rows = 0;
    std::size_t depth = 0;      ///< k < depth
};

/// c(i, j) -= sum_{k < depth} a(i, k) b(j, k) for i < rows, j < cols (column-major c, leading
/// dimension ldc); with lower_only, only the entries i >= j (a and b then the same panel).
/// Preconditions: rows <= a_rows, cols <= b_rows.
void subtract_products(double* c, std::size_t ldc, const product_panels& p, std::size_t rows, std::size_t cols,
                       bool lower_only);

}  // namespace wane

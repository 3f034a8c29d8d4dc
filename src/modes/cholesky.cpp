#include "modes/cholesky.hpp"

#include <algorithm>
#include <cmath>
#include <vector>

#include "modes/tile_products.hpp"

namespace wane {

namespace {

/// Columns factored per block (the rank of each trailing update). 32 and 48 cost the same on the
/// demo note (89.7 M instructions for its factors); 64 more (92.4 M: the rows below a block are
/// solved by Eigen's triangular solve, whose share grows with the block).
constexpr Eigen::Index block_n = 32;

/// The diagonal block (b x b, lower triangle) factored column by column; false on a pivot <= 0.
bool factor_diagonal_block(Eigen::Ref<Eigen::MatrixXd> a) {
    const Eigen::Index b = a.rows();
    for (Eigen::Index j = 0; j < b; ++j) {
        double d = a(j, j);
        for (Eigen::Index k = 0; k < j; ++k) d -= a(j, k) * a(j, k);
        if (!(d > 0.0)) return false;
        d = std::sqrt(d);
        a(j, j) = d;
        for (Eigen::Index i = j + 1; i < b; ++i) {
            double s = a(i, j);
            for (Eigen::Index k = 0; k < j; ++k) s -= a(i, k) * a(j, k);
            a(i, j) = s / d;
        }
    }
    return true;
}

}  // namespace

bool cholesky_in_place(Eigen::Ref<Eigen::MatrixXd> a) {
    const Eigen::Index n = a.rows();
    std::vector<double> packed;
    for (Eigen::Index k0 = 0; k0 < n; k0 += block_n) {
        const Eigen::Index b = std::min(block_n, n - k0), rest = n - k0 - b;
        if (!factor_diagonal_block(a.block(k0, k0, b, b))) return false;
        if (rest == 0) break;
        // The rows below: A21 <- A21 L11^-T.
        a.block(k0, k0, b, b).transpose().triangularView<Eigen::Upper>().solveInPlace<Eigen::OnTheRight>(a.block(k0 + b, k0, rest, b));
        // The trailing matrix: A22 -= A21 A21^T (lower triangle), A21 packed with padded rows.
        const auto m = static_cast<std::size_t>(rest);
        const std::size_t rows_pad = (m + product_tile_rows - 1) / product_tile_rows * product_tile_rows;
        packed.assign(rows_pad * static_cast<std::size_t>(b), 0.0);
        for (Eigen::Index k = 0; k < b; ++k)
            for (Eigen::Index i = 0; i < rest; ++i) packed[static_cast<std::size_t>(k) * rows_pad + static_cast<std::size_t>(i)] = a(k0 + b + i, k0 + k);
        const product_panels panel{.a = packed.data(), .a_rows = rows_pad, .b = packed.data(), .b_rows = rows_pad,
                                   .depth = static_cast<std::size_t>(b)};
        subtract_products(&a(k0 + b, k0 + b), static_cast<std::size_t>(a.outerStride()), panel, m, m, true);
    }
    return true;
}

void solve_lower_in_place(const Eigen::Ref<const Eigen::MatrixXd>& l, Eigen::Ref<Eigen::MatrixXd> b) {
    const Eigen::Index n = l.rows(), cols = b.cols();
    const std::size_t cols_pad = (static_cast<std::size_t>(cols) + product_tile_cols - 1) / product_tile_cols * product_tile_cols;
    std::vector<double> packed_l, packed_x;
    for (Eigen::Index r0 = 0; r0 < n; r0 += block_n) {
        const Eigen::Index nb = std::min(block_n, n - r0), rest = n - r0 - nb;
        // The block's rows: forward substitution (their dependence on earlier blocks already taken off).
        for (Eigen::Index j = 0; j < cols; ++j)
            for (Eigen::Index i = 0; i < nb; ++i) {
                double s = b(r0 + i, j);
                for (Eigen::Index k = 0; k < i; ++k) s -= l(r0 + i, r0 + k) * b(r0 + k, j);
                b(r0 + i, j) = s / l(r0 + i, r0 + i);
            }
        if (rest == 0) break;
        // The rows below: B2 -= L21 X1, L21 packed with padded rows, X1 transposed.
        const auto m = static_cast<std::size_t>(rest), depth = static_cast<std::size_t>(nb);
        const std::size_t rows_pad = (m + product_tile_rows - 1) / product_tile_rows * product_tile_rows;
        packed_l.assign(rows_pad * depth, 0.0);
        packed_x.assign(cols_pad * depth, 0.0);
        for (Eigen::Index k = 0; k < nb; ++k) {
            for (Eigen::Index i = 0; i < rest; ++i) packed_l[static_cast<std::size_t>(k) * rows_pad + static_cast<std::size_t>(i)] = l(r0 + nb + i, r0 + k);
            for (Eigen::Index j = 0; j < cols; ++j) packed_x[static_cast<std::size_t>(k) * cols_pad + static_cast<std::size_t>(j)] = b(r0 + k, j);
        }
        subtract_products(&b(r0 + nb, 0), static_cast<std::size_t>(b.outerStride()),
                          {.a = packed_l.data(), .a_rows = rows_pad, .b = packed_x.data(), .b_rows = cols_pad, .depth = depth}, m,
                          static_cast<std::size_t>(cols), false);
    }
}

}  // namespace wane

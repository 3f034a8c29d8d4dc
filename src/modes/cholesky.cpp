#include "modes/cholesky.hpp"

#include <algorithm>
#include <cmath>
#include <cstring>
#include <numeric>
#include <vector>

#include "modes/tile_products.hpp"
#include "synthesis/kernel_clones.hpp"

namespace wane {

namespace {

/// Columns factored per block (the rank of each trailing update). On the demo note's factors
/// (callgrind): 32 columns 72.7 M instructions, 64 columns 74.5 M (the panel solve's share, b^2 / 2
/// per row, grows with the block).
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

/// Four doubles side by side (GCC/Clang vector extension): one AVX register, two SSE2 ones.
using lanes = double __attribute__((vector_size(32)));
constexpr std::size_t lane_n = 4;

/// The rows below a factored diagonal block: A21 <- A21 L11^-T, column by column, for each row
/// a(i, j) = (a(i, j) - sum_{k < j} a(i, k) l(j, k)) / l(j, j), the sum over k in order; rows
/// (a multiple of lane_n of them, the rest by the caller) eight at a time in two lanes, four in
/// one. a: rows x b (leading dimension lda), l: b x b (leading dimension ldl). Compiled for AVX2
/// and the baseline (no FMA, the same bits).
WANE_KERNEL_CLONES
void solve_panel_rows(double* __restrict a, std::size_t lda, std::size_t rows, const double* __restrict l, std::size_t ldl,
                      std::size_t b) {
    std::size_t i0 = 0;
    for (; i0 + 2 * lane_n <= rows; i0 += 2 * lane_n) {
        for (std::size_t j = 0; j < b; ++j) {
            lanes s0, s1;
            std::memcpy(&s0, a + j * lda + i0, sizeof s0), std::memcpy(&s1, a + j * lda + i0 + lane_n, sizeof s1);
            for (std::size_t k = 0; k < j; ++k) {
                lanes x0, x1;
                std::memcpy(&x0, a + k * lda + i0, sizeof x0), std::memcpy(&x1, a + k * lda + i0 + lane_n, sizeof x1);
                const double f = l[k * ldl + j];
                s0 -= x0 * f, s1 -= x1 * f;
            }
            const double d = l[j * ldl + j];
            s0 /= d, s1 /= d;
            std::memcpy(a + j * lda + i0, &s0, sizeof s0), std::memcpy(a + j * lda + i0 + lane_n, &s1, sizeof s1);
        }
    }
    for (; i0 + lane_n <= rows; i0 += lane_n) {
        for (std::size_t j = 0; j < b; ++j) {
            lanes s0;
            std::memcpy(&s0, a + j * lda + i0, sizeof s0);
            for (std::size_t k = 0; k < j; ++k) {
                lanes x0;
                std::memcpy(&x0, a + k * lda + i0, sizeof x0);
                s0 -= x0 * l[k * ldl + j];
            }
            s0 /= l[j * ldl + j];
            std::memcpy(a + j * lda + i0, &s0, sizeof s0);
        }
    }
}

/// solve_panel_rows on every row of the panel a (rows x b, below the block l): the last rows
/// (fewer than four) one at a time, the same arithmetic.
void solve_panel(Eigen::Ref<Eigen::MatrixXd> a, const Eigen::Ref<const Eigen::MatrixXd>& l) {
    const auto rows = static_cast<std::size_t>(a.rows()), b = static_cast<std::size_t>(a.cols());
    const std::size_t vector_rows = rows / lane_n * lane_n;
    solve_panel_rows(a.data(), static_cast<std::size_t>(a.outerStride()), vector_rows, l.data(),
                     static_cast<std::size_t>(l.outerStride()), b);
    for (std::size_t i = vector_rows; i < rows; ++i)
        for (std::size_t j = 0; j < b; ++j) {
            const auto row = static_cast<Eigen::Index>(i), col = static_cast<Eigen::Index>(j);
            double s = a(row, col);
            for (Eigen::Index k = 0; k < col; ++k) s -= a(row, k) * l(col, k);
            a(row, col) = s / l(col, col);
        }
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
        solve_panel(a.block(k0 + b, k0, rest, b), a.block(k0, k0, b, b));
        // The trailing matrix: A22 -= A21 A21^T (lower triangle), A21 packed with padded rows. The
        // one panel is both a (rows in tiles of product_tile_rows) and b (product_tile_cols), so
        // its rows are padded to a multiple of both (zero rows: the sums of the real entries are unchanged).
        const auto m = static_cast<std::size_t>(rest);
        constexpr std::size_t both_tiles = std::lcm(product_tile_rows, product_tile_cols);
        const std::size_t rows_pad = (m + both_tiles - 1) / both_tiles * both_tiles;
        packed.resize(rows_pad * static_cast<std::size_t>(b));  // every entry written below
        for (Eigen::Index k = 0; k < b; ++k) {
            double* column = packed.data() + static_cast<std::size_t>(k) * rows_pad;
            for (Eigen::Index i = 0; i < rest; ++i) column[i] = a(k0 + b + i, k0 + k);
            std::fill(column + rest, column + rows_pad, 0.0);
        }
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

#include "modes/tile_products.hpp"

#include <cassert>
#include <cstring>

#include "synthesis/kernel_clones.hpp"

namespace wane {

namespace {

/// Four doubles side by side (GCC/Clang vector extension): one AVX register, two SSE2 ones.
using lanes = double __attribute__((vector_size(32)));
constexpr std::size_t lane_n = 4;
/// A tile's rows as lanes: 12 sums in registers (8 x 6), with the two lanes loaded and one
/// broadcast 15 of the 16 AVX registers. Measured on the demo note's factors (callgrind): 12 x 4
/// spilled its sums and cost 97.7 M instructions against 67.5 M for 8 x 4; 8 x 6 with the sum
/// over k unrolled by 4 took 2.8 M fewer than 8 x 4 unrolled.
constexpr std::size_t tile_lanes = product_tile_rows / lane_n, tile_cols = product_tile_cols;
static_assert(tile_lanes * lane_n == product_tile_rows);

WANE_KERNEL_CLONES
void subtract_tiles(double* __restrict c, std::size_t ldc, const double* __restrict a, std::size_t a_rows,
                    const double* __restrict b, std::size_t b_rows, std::size_t depth, std::size_t rows, std::size_t cols,
                    bool lower_only) {
    // A tile row's strip of a (product_tile_rows x depth) stays in the first-level cache across
    // the tiles of its row.
    for (std::size_t i0 = 0; i0 < rows; i0 += product_tile_rows) {
        for (std::size_t j0 = 0; j0 < cols && !(lower_only && j0 >= i0 + product_tile_rows); j0 += tile_cols) {
            lanes acc[tile_lanes][tile_cols] = {};
#pragma GCC unroll 4
            for (std::size_t k = 0; k < depth; ++k) {
                const double* a_col = a + k * a_rows + i0;
                const double* b_col = b + k * b_rows + j0;
                lanes x[tile_lanes];
                for (std::size_t l = 0; l < tile_lanes; ++l) std::memcpy(&x[l], a_col + l * lane_n, sizeof x[l]);
                for (std::size_t t = 0; t < tile_cols; ++t)
                    for (std::size_t l = 0; l < tile_lanes; ++l) acc[l][t] += x[l] * b_col[t];
            }
            // Whole: every entry of the tile is wanted (inside c, and below the diagonal when lower_only).
            const bool whole = i0 + product_tile_rows <= rows && (!lower_only || i0 >= j0 + tile_cols - 1);
            for (std::size_t t = 0; t < tile_cols && j0 + t < cols; ++t) {
                double* out = c + (j0 + t) * ldc + i0;
                if (whole) {
                    for (std::size_t l = 0; l < tile_lanes; ++l) {
                        lanes o;
                        std::memcpy(&o, out + l * lane_n, sizeof o);
                        o -= acc[l][t];
                        std::memcpy(out + l * lane_n, &o, sizeof o);
                    }
                    continue;
                }
                for (std::size_t r = 0; r < product_tile_rows && i0 + r < rows; ++r)
                    if (!lower_only || i0 + r >= j0 + t) out[r] -= acc[r / lane_n][t][r % lane_n];
            }
        }
    }
}

}  // namespace

void subtract_products(double* c, std::size_t ldc, const product_panels& p, std::size_t rows, std::size_t cols,
                       bool lower_only) {
    assert(p.a_rows % product_tile_rows == 0 && p.b_rows % product_tile_cols == 0);
    assert(rows <= p.a_rows && cols <= p.b_rows && (cols + product_tile_cols - 1) / product_tile_cols * product_tile_cols <= p.b_rows);
    subtract_tiles(c, ldc, p.a, p.a_rows, p.b, p.b_rows, p.depth, rows, cols, lower_only);
}

}  // namespace wane

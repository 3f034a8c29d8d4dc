#include "core/order_select.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <cstdint>
#include <cstring>
#include <limits>

#include "synthesis/kernel_clones.hpp"

#if defined(__x86_64__)
#include <immintrin.h>
#endif

namespace wane {

order_bracket bracket_around(float guess, double spread) {
    assert(spread >= 1.0);
    if (!(guess > 0.0f)) return {};
    return {.low = static_cast<float>(static_cast<double>(guess) / spread),
            .high = static_cast<float>(static_cast<double>(guess) * spread)};
}

namespace {

/// The k-th (and with below the (k-1)-th) smallest of values[0, n), reordered.
order_values select_all(std::span<float> values, std::size_t k, bool below) {
    const auto kth = values.begin() + static_cast<std::ptrdiff_t>(k);
    std::nth_element(values.begin(), kth, values.end());
    order_values out{.kth = *kth, .below = 0.0f};
    if (below) out.below = *std::max_element(values.begin(), kth);
    return out;
}

/// Ranks up to this are selected by keeping the smallest values found so far in order.
constexpr std::size_t small_rank_limit = 8;

/// The k-th (and with below the (k-1)-th) smallest for k = K < small_rank_limit: the K + 1
/// smallest so far kept sorted (at first all infinity), one pass; each value is passed down the
/// kept ones by compare and swap (no branch on the data, so the order of the values costs
/// nothing; a NaN passes through, never kept).
template <std::size_t K>
order_values select_small_rank(std::span<const float> values, bool below) {
    static_assert(K < small_rank_limit && small_rank_limit == max_small_rank + 1);
    assert(K < values.size());
    std::array<float, K + 1> kept{};
    kept.fill(std::numeric_limits<float>::infinity());
    for (float v : values) {
        for (std::size_t j = 0; j <= K; ++j) {
            const bool under = v < kept[j];
            const float low = under ? v : kept[j];
            v = under ? kept[j] : v;
            kept[j] = low;
        }
    }
    if constexpr (K == 0) {
        return {.kth = kept[0], .below = 0.0f};
    } else {
        return {.kth = kept[K], .below = below ? kept[K - 1] : 0.0f};
    }
}

order_values select_small_rank(std::span<const float> values, std::size_t k, bool below) {
    switch (k) {
    case 0: return select_small_rank<0>(values, below);
    case 1: return select_small_rank<1>(values, below);
    case 2: return select_small_rank<2>(values, below);
    case 3: return select_small_rank<3>(values, below);
    case 4: return select_small_rank<4>(values, below);
    case 5: return select_small_rank<5>(values, below);
    case 6: return select_small_rank<6>(values, below);
    default: assert(k == 7); return select_small_rank<7>(values, below);
    }
}

/// Eight floats side by side, a set's value in each lane (GCC's vector extension: one AVX
/// register in select_small_ranks' AVX2 clone, two SSE registers on the baseline), and their
/// compare's mask.
using float8 = float __attribute__((vector_size(32)));
using mask8 = std::int32_t __attribute__((vector_size(32)));
static_assert(rank_lanes == 8);

/// select_small_ranks for k = K: per set the kept values at first all infinity (as
/// select_small_rank's), then each value passed down the kept ones with select_small_rank's
/// compare and swap, a lane per set (v < kept: v the new kept there and the old kept passed on; else v passed
/// on), as min and max (x < y ? x : y and y < x ? x : y pick as that compare does, NaN included).
template <std::size_t K>
[[gnu::always_inline]] inline void select_small_ranks(std::span<const float> values, std::size_t count,
                                                      std::span<float, rank_lanes> out) {
    static_assert(K <= max_small_rank);
    assert(K < count && values.size() >= count * rank_lanes);
    std::array<float8, K + 1> kept{};
    for (float8& k : kept) k = float8{} + std::numeric_limits<float>::infinity();
    for (std::size_t i = 0; i < count; ++i) {
        float8 v;
        std::memcpy(&v, values.data() + i * rank_lanes, sizeof v);
        for (std::size_t j = 0; j <= K; ++j) {
            const mask8 under = v < kept[j];
            const float8 low = under ? v : kept[j];
            v = under ? kept[j] : v;
            kept[j] = low;
        }
    }
    std::memcpy(out.data(), &kept[K], sizeof kept[K]);
}

}  // namespace

// Compiled for AVX2 and the baseline (WANE_KERNEL_CLONES), each clone with the eight ranks' loops
// inlined: the same compares and picks, bit for bit.
WANE_KERNEL_CLONES
void select_small_ranks(std::span<const float> values, std::size_t count, std::size_t k, std::span<float, rank_lanes> out) {
    switch (k) {
    case 0: return select_small_ranks<0>(values, count, out);
    case 1: return select_small_ranks<1>(values, count, out);
    case 2: return select_small_ranks<2>(values, count, out);
    case 3: return select_small_ranks<3>(values, count, out);
    case 4: return select_small_ranks<4>(values, count, out);
    case 5: return select_small_ranks<5>(values, count, out);
    case 6: return select_small_ranks<6>(values, count, out);
    default: assert(k == 7); return select_small_ranks<7>(values, count, out);
    }
}

range_split split_range_baseline(std::span<const float> values, float low, float high, std::span<float> inside) {
    assert(inside.size() >= values.size());
    std::size_t under = 0, m = 0;
    for (const float v : values) {
        inside[m] = v;
        m += static_cast<std::size_t>((v >= low) & (v <= high));
        under += static_cast<std::size_t>(v < low);
    }
    return {.under = under, .inside = m};
}

#if defined(__x86_64__)
namespace {

/// compress_lanes[mask]: the lanes whose bit is set in mask, in order, then lane 0 for the rest
/// (vpermps' indices: the kept values packed to the front).
using lane_indices = std::array<std::int32_t, 8>;
constexpr std::array<lane_indices, 256> make_compress_lanes() {
    std::array<lane_indices, 256> table{};
    for (std::size_t mask = 0; mask < table.size(); ++mask) {
        std::size_t to = 0;
        for (std::int32_t lane = 0; lane < 8; ++lane)
            if ((mask >> lane) & 1u) table[mask][to++] = lane;
    }
    return table;
}
alignas(32) constexpr std::array<lane_indices, 256> compress_lanes = make_compress_lanes();

/// split_range_baseline eight values at a time: the same compares (ordered: false for a NaN), the
/// values inside packed to the front by vpermps and stored whole at inside + m (m <= the values
/// read, so the store stays within inside's first values.size()), then the last few one by one.
/// The same counts and the same values inside in the same order, bit for bit.
[[gnu::target("avx2,popcnt")]] range_split split_range_avx2(std::span<const float> values, float low, float high,
                                                            std::span<float> inside) {
    const __m256 low8 = _mm256_set1_ps(low), high8 = _mm256_set1_ps(high);
    std::size_t under = 0, m = 0, i = 0;
    for (; i + 8 <= values.size(); i += 8) {
        const __m256 v = _mm256_loadu_ps(values.data() + i);
        const __m256 in = _mm256_and_ps(_mm256_cmp_ps(v, low8, _CMP_GE_OQ), _mm256_cmp_ps(v, high8, _CMP_LE_OQ));
        const auto in_mask = static_cast<unsigned>(_mm256_movemask_ps(in));
        const auto under_mask = static_cast<unsigned>(_mm256_movemask_ps(_mm256_cmp_ps(v, low8, _CMP_LT_OQ)));
        __m256i lanes;
        std::memcpy(&lanes, compress_lanes[in_mask].data(), sizeof lanes);
        _mm256_storeu_ps(inside.data() + m, _mm256_permutevar8x32_ps(v, lanes));
        m += static_cast<std::size_t>(__builtin_popcount(in_mask));
        under += static_cast<std::size_t>(__builtin_popcount(under_mask));
    }
    for (; i < values.size(); ++i) {
        const float v = values[i];
        inside[m] = v;
        m += static_cast<std::size_t>((v >= low) & (v <= high));
        under += static_cast<std::size_t>(v < low);
    }
    return {.under = under, .inside = m};
}

/// gather_values eight at a time (vgatherdps: the same loads, one instruction), the last few one
/// by one.
[[gnu::target("avx2")]] void gather_values_avx2(std::span<const float> from, std::span<const int> at, std::span<float> out) {
    std::size_t i = 0;
    for (; i + 8 <= at.size(); i += 8) {
        __m256i index;
        std::memcpy(&index, at.data() + i, sizeof index);
        _mm256_storeu_ps(out.data() + i, _mm256_i32gather_ps(from.data(), index, sizeof(float)));
    }
    for (; i < at.size(); ++i) out[i] = from[static_cast<std::size_t>(at[i])];
}

}  // namespace
#endif

void gather_values(std::span<const float> from, std::span<const int> at, std::span<float> out) {
    assert(out.size() >= at.size());
    assert(std::all_of(at.begin(), at.end(), [&](int k) { return k >= 0 && static_cast<std::size_t>(k) < from.size(); }));
#if defined(__x86_64__)
    if (cpu_has_avx2()) return gather_values_avx2(from, at, out);
#endif
    for (std::size_t i = 0; i < at.size(); ++i) out[i] = from[static_cast<std::size_t>(at[i])];
}

range_split split_range(std::span<const float> values, float low, float high, std::span<float> inside) {
    assert(inside.size() >= values.size());
#if defined(__x86_64__)
    if (cpu_has_avx2()) return split_range_avx2(values, low, high, inside);
#endif
    return split_range_baseline(values, low, high, inside);
}

order_values select_order(std::span<float> values, std::size_t k, bool want_below, order_bracket bracket,
                          std::vector<float>& scratch) {
    const std::size_t n = values.size();
    assert(k < n);
    const bool below = want_below && k > 0;
    const std::size_t first_rank = below ? k - 1 : k;
    if (k < small_rank_limit) return select_small_rank(values, k, below);
    if (!(bracket.low <= bracket.high)) return select_all(values, k, below);
    if (scratch.size() < n) scratch.resize(n);
    // One pass: the values inside the bracket go to scratch (ranks [under, under + m)), those
    // under it are counted (ranks [0, under)); the rest hold ranks [under + m, n).
    const range_split split = split_range(values, bracket.low, bracket.high, scratch);
    const std::size_t under = split.under;
    const std::size_t upto = under + split.inside;
    std::size_t m = split.inside;
    if (under <= first_rank && k < upto) return select_all(std::span(scratch).first(m), k - under, below);
    // Both ranks lie under the bracket or both over it: select among that side only.
    float low = -std::numeric_limits<float>::infinity(), high = std::numeric_limits<float>::infinity();
    std::size_t rank0 = 0;
    if (k < under) {
        high = std::nextafter(bracket.low, low);
    } else if (first_rank >= upto) {
        low = std::nextafter(bracket.high, high);
        rank0 = upto;
    } else {
        return select_all(values, k, below);  // the two ranks lie in two parts
    }
    m = split_range(values, low, high, scratch).inside;
    return select_all(std::span(scratch).first(m), k - rank0, below);
}

}  // namespace wane

#include "core/order_select.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <cstdint>
#include <cstring>
#include <limits>

#include "synthesis/kernel_clones.hpp"

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
/// smallest so far kept sorted, one pass; each value is passed down the kept ones by compare and
/// swap (no branch on the data, so the order of the values costs nothing; a NaN passes through).
template <std::size_t K>
order_values select_small_rank(std::span<const float> values, bool below) {
    static_assert(K < small_rank_limit && small_rank_limit == max_small_rank + 1);
    assert(K < values.size());
    std::array<float, K + 1> kept{};
    std::copy_n(values.begin(), K + 1, kept.begin());
    std::sort(kept.begin(), kept.end());
    for (std::size_t i = K + 1; i < values.size(); ++i) {
        float v = values[i];
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

/// select_small_ranks for k = K: per set the first K + 1 values sorted (as select_small_rank
/// does), then each further value passed down the kept ones with select_small_rank's compare and
/// swap, a lane per set (v < kept: v the new kept there and the old kept passed on; else v passed
/// on), as min and max (x < y ? x : y and y < x ? x : y pick as that compare does, NaN included).
template <std::size_t K>
[[gnu::always_inline]] inline void select_small_ranks(std::span<const float> values, std::size_t count,
                                                      std::span<float, rank_lanes> out) {
    static_assert(K <= max_small_rank);
    assert(K < count && values.size() >= count * rank_lanes);
    std::array<std::array<float, rank_lanes>, K + 1> first_sorted{};
    for (std::size_t l = 0; l < rank_lanes; ++l) {
        std::array<float, K + 1> first{};
        for (std::size_t j = 0; j <= K; ++j) first[j] = values[j * rank_lanes + l];
        std::sort(first.begin(), first.end());
        for (std::size_t j = 0; j <= K; ++j) first_sorted[j][l] = first[j];
    }
    std::array<float8, K + 1> kept{};
    std::memcpy(kept.data(), first_sorted.data(), sizeof kept);
    for (std::size_t i = K + 1; i < count; ++i) {
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
    std::size_t under = 0, m = 0;
    for (const float v : values) {
        scratch[m] = v;
        m += static_cast<std::size_t>((v >= bracket.low) & (v <= bracket.high));
        under += static_cast<std::size_t>(v < bracket.low);
    }
    const std::size_t upto = under + m;
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
    m = 0;
    for (const float v : values) {
        scratch[m] = v;
        m += static_cast<std::size_t>((v >= low) & (v <= high));
    }
    return select_all(std::span(scratch).first(m), k - rank0, below);
}

}  // namespace wane

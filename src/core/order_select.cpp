#include "core/order_select.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <limits>

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

/// The k-th (and with below the (k-1)-th) smallest for k < small_rank_limit: the k + 1 smallest
/// so far kept sorted, one pass (a value enters only when it is below the largest kept).
order_values select_small_rank(std::span<const float> values, std::size_t k, bool below) {
    assert(k < small_rank_limit && k < values.size());
    std::array<float, small_rank_limit> kept{};
    std::copy_n(values.begin(), k + 1, kept.begin());
    std::sort(kept.begin(), kept.begin() + static_cast<std::ptrdiff_t>(k) + 1);
    for (std::size_t i = k + 1; i < values.size(); ++i) {
        const float v = values[i];
        if (!(v < kept[k])) continue;
        std::size_t j = k;
        for (; j > 0 && kept[j - 1] > v; --j) kept[j] = kept[j - 1];
        kept[j] = v;
    }
    return {.kth = kept[k], .below = below ? kept[k - 1] : 0.0f};
}

}  // namespace

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

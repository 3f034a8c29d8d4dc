#include "core/order_select.hpp"

#include <algorithm>
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

}  // namespace

order_values select_order(std::span<float> values, std::size_t k, bool want_below, order_bracket bracket,
                          std::vector<float>& scratch) {
    const std::size_t n = values.size();
    assert(k < n);
    const bool below = want_below && k > 0;
    const std::size_t first_rank = below ? k - 1 : k;
    if (!(bracket.low <= bracket.high)) return select_all(values, k, below);
    // Ranks: values < low hold [0, under), values in [low, high] [under, upto), the rest [upto, n).
    std::size_t under = 0, upto = 0;
    for (const float v : values) {
        under += static_cast<std::size_t>(v < bracket.low);
        upto += static_cast<std::size_t>(v <= bracket.high);
    }
    // The part holding both wanted ranks as a value range [low, high] and its first rank.
    float low = bracket.low, high = bracket.high;
    std::size_t rank0 = under;
    if (k < under) {
        low = -std::numeric_limits<float>::infinity();
        high = std::nextafter(bracket.low, low);
        rank0 = 0;
    } else if (first_rank >= upto) {
        low = std::nextafter(bracket.high, std::numeric_limits<float>::infinity());
        high = std::numeric_limits<float>::infinity();
        rank0 = upto;
    } else if (first_rank < under || k >= upto) {
        return select_all(values, k, below);  // the two ranks lie in two parts
    }
    if (scratch.size() < n) scratch.resize(n);
    std::size_t m = 0;
    for (const float v : values) {
        scratch[m] = v;
        m += static_cast<std::size_t>((v >= low) & (v <= high));
    }
    return select_all(std::span(scratch).first(m), k - rank0, below);
}

}  // namespace wane

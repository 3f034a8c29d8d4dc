#include "modes/fit_memo.hpp"

#include <algorithm>
#include <bit>
#include <cstdint>
#include <cstring>
#include <numeric>
#include <utility>

namespace wane {

namespace {

/// Bitwise: -0 and +0 are different inputs here.
bool same_bits(double a, double b) { return std::bit_cast<std::uint64_t>(a) == std::bit_cast<std::uint64_t>(b); }

bool same_piece(const shape_piece& a, const shape_piece& b) {
    return a.start == b.start && a.count == b.count && same_bits(a.scale, b.scale) && same_bits(a.rho, b.rho) &&
           a.power == b.power;
}

bool same_shape(const mode_shape& a, const mode_shape& b) {
    return std::equal(a.begin(), a.end(), b.begin(), b.end(), same_piece);
}

}  // namespace

std::vector<std::ptrdiff_t> memo_matches(const shaped_fit_memo& memo, std::span<const mode_shape> own,
                                         std::span<const double> omega, std::span<const char> plain,
                                         std::size_t count, double sample_rate_hz) {
    std::vector<std::ptrdiff_t> out(own.size(), -1);
    if (memo.count == 0 || memo.count != count || memo.sample_rate_hz != sample_rate_hz) return out;
    // The old modes sorted by omega, so each new mode looks among the few with its omega.
    std::vector<std::size_t> by_omega(memo.omega.size());
    std::iota(by_omega.begin(), by_omega.end(), std::size_t{0});
    std::sort(by_omega.begin(), by_omega.end(), [&](std::size_t a, std::size_t b) {
        return std::pair(memo.omega[a], a) < std::pair(memo.omega[b], b);
    });
    std::vector<char> taken(memo.omega.size(), 0);
    for (std::size_t k = 0; k < own.size(); ++k) {
        auto it = std::lower_bound(by_omega.begin(), by_omega.end(), omega[k],
                                   [&](std::size_t a, double w) { return memo.omega[a] < w; });
        for (; it != by_omega.end() && memo.omega[*it] == omega[k]; ++it) {
            const std::size_t a = *it;
            if (taken[a] == 0 && same_bits(memo.omega[a], omega[k]) && memo.plain[a] == plain[k] && same_shape(memo.own[a], own[k])) {
                out[k] = static_cast<std::ptrdiff_t>(a);
                taken[a] = 1;
                break;
            }
        }
    }
    return out;
}

bool memo_same_samples(const shaped_fit_memo& memo, std::span<const float> x) {
    // Bitwise (a -0 or a NaN sample is not the same sample here): the samples' bytes.
    return memo.x.size() == x.size() && (x.empty() || std::memcmp(x.data(), memo.x.data(), x.size_bytes()) == 0);
}

std::vector<std::ptrdiff_t> gram_matches(const shaped_fit_memo& memo, std::span<const std::ptrdiff_t> old_of) {
    std::vector<std::ptrdiff_t> out(old_of.begin(), old_of.end());
    for (std::ptrdiff_t& a : out)
        if (a >= static_cast<std::ptrdiff_t>(memo.gram_modes)) a = -1;
    return out;
}

void add_projections(shaped_fit_memo& to, const shaped_fit_memo& from) {
    if (to.count == 0) to.count = from.count, to.sample_rate_hz = from.sample_rate_hz;
    if (from.count == 0 || from.count != to.count || from.sample_rate_hz != to.sample_rate_hz) return;
    const std::vector<std::ptrdiff_t> in_to = memo_matches(to, from.own, from.omega, from.plain, from.count, from.sample_rate_hz);
    for (std::size_t k = 0; k < from.omega.size(); ++k) {
        if (in_to[k] >= 0) continue;
        to.own.push_back(from.own[k]);
        to.omega.push_back(from.omega[k]);
        to.plain.push_back(from.plain[k]);
        to.rhs.insert(to.rhs.end(), from.rhs.begin() + static_cast<std::ptrdiff_t>(2 * k), from.rhs.begin() + static_cast<std::ptrdiff_t>(2 * k + 2));
    }
}

}  // namespace wane

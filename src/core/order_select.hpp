// Exact order statistics (the k-th smallest) of float values taken frame after frame: a median or
// quantile per band per STFT frame. The value found is the same as std::nth_element's; a bracket
// around the previous frame's answer only makes finding it cheaper.
#pragma once

#include <cstddef>
#include <span>
#include <vector>

namespace wane {

/// The k-th smallest value of a set and, when asked, the (k-1)-th.
struct order_values {
    float kth = 0.0f;
    float below = 0.0f;  ///< the (k-1)-th smallest (only when asked and k > 0)
};

/// A value range [low, high] expected to hold the k-th smallest (low > high: no bracket).
struct order_bracket {
    float low = 1.0f;
    float high = 0.0f;
};

/// The bracket guess / spread .. guess * spread (spread >= 1); none when guess is not positive.
order_bracket bracket_around(float guess, double spread);

/// out[i] = from[at[i]] for i < at.size() (every at[i] an index into from; out at least as long):
/// a set's values picked out of a frame's bins. An AVX2 gather where the CPU has it, else one by
/// one; the same values either way.
void gather_values(std::span<const float> from, std::span<const int> at, std::span<float> out);

/// How split_range divided a set by a value range [low, high].
struct range_split {
    std::size_t under = 0;   ///< values under low
    std::size_t inside = 0;  ///< values in [low, high], copied in order to inside[0, inside)
};

/// Copies the values in [low, high] to the front of `inside` (size >= values.size(); past the
/// count its values are left unspecified) in their order, and counts those under low; a NaN is
/// neither. An AVX2 path where the CPU has it (eight values per compare, packed by a lane
/// permute), else split_range_baseline's one value at a time: the same counts and values.
range_split split_range(std::span<const float> values, float low, float high, std::span<float> inside);
range_split split_range_baseline(std::span<const float> values, float low, float high, std::span<float> inside);

/// Selects the k-th smallest of `values` (reordered; 0-based, k < size) and, with want_below and
/// k > 0, the (k-1)-th. A small k (under 8) keeps the k + 1 smallest in one pass. Otherwise one
/// pass (split_range) copies the values inside `bracket` to `scratch` (which keeps its capacity
/// across calls) and counts those under it; when both ranks fall inside, only those are selected
/// among, else the side that holds both, else all (std::nth_element).
order_values select_order(std::span<float> values, std::size_t k, bool want_below, order_bracket bracket,
                          std::vector<float>& scratch);

/// Sets select_small_ranks takes side by side, and the largest rank it selects.
inline constexpr std::size_t rank_lanes = 8;
inline constexpr std::size_t max_small_rank = 7;

/// The k-th smallest (k <= max_small_rank < count) of each of rank_lanes sets of `count` values,
/// set l's value i at values[i * rank_lanes + l], into out[l]: select_order's pass for a small
/// rank (the k + 1 smallest so far kept sorted, each further value passed down them by compare
/// and swap), the sets in vector lanes; each out[l] is the kth select_order gives that set.
void select_small_ranks(std::span<const float> values, std::size_t count, std::size_t k, std::span<float, rank_lanes> out);

}  // namespace wane

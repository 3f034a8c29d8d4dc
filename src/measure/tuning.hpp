// The tuning difference between two takes of a note, from their strongest partials.
#pragma once

#include <cstddef>
#include <optional>
#include <span>

#include "tracking/track.hpp"

namespace wane {

struct tuning_params {
    std::size_t strongest = 5;           ///< partials of the reference that take part
    double max_offset_cents = 50.0;      ///< a partial of b pairs with one of a only this close
};

struct tuning_difference {
    double cents = 0.0;     ///< amplitude-weighted median of cents_between(f_b, f_a) over the pairs
    std::size_t pairs = 0;  ///< strongest partials of a that found a partner in b
};

/// Tracks of b against the strongest tracks of a: each of a's `strongest` tracks (by peak level)
/// pairs with b's track nearest in frequency within max_offset_cents; each track's frequency is
/// its amplitude-weighted mean. Empty when no pair is found.
std::optional<tuning_difference> tuning_between(std::span<const partial_track> a, std::span<const partial_track> b,
                                                const tuning_params& params = {});

}  // namespace wane

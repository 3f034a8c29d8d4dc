// Plain sentences about where and how a copy differs from its recording (difference cells,
// partials of the recording missing from the copy, a smeared onset), and about a patch (partials
// that end in a held level). One channel at a time.
#pragma once

#include <cstddef>
#include <span>
#include <string>
#include <vector>

#include "core/patch.hpp"
#include "measure/differences.hpp"

namespace wane {

struct remark_params {
    difference_params cells{};
    std::size_t max_regions = 5;          ///< region sentences at most
    /// Missing partials: peaks of the recording's spectrum over the early part of the note
    /// (Blackman-Harris window of spectrum_window_s, frames every half window from the onset for
    /// spectrum_span_s), within partial_range_db of its loudest peak and standing partial_prominence_db
    /// over the lowest bin within 4 main-lobe widths, where the copy is missing_below_db quieter.
    double spectrum_window_s = 0.1;
    double spectrum_span_s = 0.3;
    double partial_range_db = 50.0;
    double partial_prominence_db = 15.0;
    double missing_below_db = 20.0;
    std::size_t missing_listed = 4;       ///< frequencies named in the sentence at most
    /// The onset counts as smeared when the copy's rise (onset_rise_s) is longer than the
    /// recording's by this much (common practice: an attack slower by 5 ms is heard, no source).
    double smeared_by_s = 0.005;
};

struct missing_partial {
    double freq_hz = 0.0;
    double level_db = 0.0;       ///< the recording's peak re its loudest peak (<= 0)
    double copy_short_db = 0.0;  ///< how much quieter the copy is there (>= missing_below_db)
};

struct copy_remarks {
    difference_cells cells;
    std::vector<difference_region> regions;
    std::vector<missing_partial> missing;  ///< loudest first
    double rise_a_s = 0.0;                 ///< onset_rise_s of the recording
    double rise_b_s = 0.0;                 ///< of the copy
    bool onset_smeared = false;
    std::vector<std::string> sentences;    ///< missing partials, onset, then regions by size
};

/// a the recording, b the copy aligned to it, onset_frames the recording's onset.
copy_remarks remark_on_copy(std::span<const float> a, std::span<const float> b, double sample_rate_hz,
                            std::size_t onset_frames, const remark_params& params = {});

/// Peaks of a's early spectrum (see remark_params) where b is missing_below_db quieter.
std::vector<missing_partial> missing_partials(std::span<const float> a, std::span<const float> b, double sample_rate_hz,
                                              std::size_t onset_frames, const remark_params& params = {});

/// "the copy is 9 dB too quiet between 2 and 4 kHz in the first 20 ms".
std::string region_sentence(const difference_region& r, double nyquist_hz);

/// Sentences about the patch alone: how many partials (and noise bands) end in a held level, and
/// whether the recording was cut while they sounded. Empty when none holds.
std::vector<std::string> patch_remarks(const patch& p);

}  // namespace wane

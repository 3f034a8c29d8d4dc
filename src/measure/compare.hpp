// Comparing a resynthesis (or any second take) with its source: alignment, spectral distances,
// octave-band decay times of both, and the time-domain SNR over the start of the note.
#pragma once

#include <cstddef>
#include <optional>
#include <span>
#include <vector>

#include "core/analysis_error.hpp"
#include "measure/align.hpp"
#include "measure/decay.hpp"
#include "measure/octave_filter.hpp"
#include "measure/remarks.hpp"
#include "measure/spectral_distance.hpp"

namespace wane {

/// Time-domain SNR of b against the reference a over [begin, end):
///   10 log10( sum a^2 / sum (a - b)^2 )  [dB]; +inf when identical, NaN when both are silent.
double snr_db(std::span<const float> a, std::span<const float> b, std::size_t begin, std::size_t end);

struct compare_params {
    align_onset_params onset{};
    spectral_distance_params spectral{};  ///< its time range is set by compare_signals
    decay_params decay{};
    double early_window_s = 0.100;        ///< "first 100 ms after onset" for the early distance and SNR
    double lowest_band_nominal_hz = 63.0;
    double highest_band_nominal_hz = 16000.0;
    /// Spectral distances count bins up to this frequency only; 0 = up to Nyquist.
    double spectral_max_freq_hz = 0.0;
    remark_params remarks{};  ///< difference cells, missing partials, onset rise
};

struct band_decay_pair {
    octave_band band;
    decay_times a;
    decay_times b;
};

struct compare_result {
    double sample_rate_hz = 0.0;
    alignment align;
    std::size_t compared_frames = 0;  ///< length of the common span after alignment (from a's start)
    double early_window_s = 0.0;      ///< as asked, or shorter when a ends sooner after its onset
    double spectral_max_freq_hz = 0.0; ///< highest bin frequency counted in the spectral distances
    spectral_distance_result whole;   ///< over the whole of a
    spectral_distance_result early;   ///< frames centred in [onset, onset + early_window_s)
    double early_snr_db = 0.0;        ///< over [onset, onset + early_window_s)
    std::vector<band_decay_pair> bands;  ///< decay from a's onset, lowest band first
    /// f0 of b against f0 of a in cents (cents_between(f0_b, f0_a)). compare_signals leaves it
    /// empty: the caller that has an f0 estimator fills it.
    std::optional<double> f0_difference_cents;
    /// Tuning of b against a in cents from the strongest partials (measure/tuning.hpp); empty
    /// when either cannot be tracked or no partial pairs.
    std::optional<double> tuning_difference_cents;
    std::size_t tuning_pairs = 0;  ///< strongest partials of a that paired with one of b
    copy_remarks remarks;          ///< where b differs from a, in cells and sentences
};

/// a is the reference; b is aligned to it first. Same sample rate (resample at the edge).
/// Throws analysis_error when a is silent or shorter than the early window.
compare_result compare_signals(std::span<const float> a, std::span<const float> b, double sample_rate_hz,
                               const compare_params& params = {});

}  // namespace wane

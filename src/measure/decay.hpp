// Decay times of a decaying signal (an impulse response, or a note from its onset):
// Schroeder backward integration (Schroeder 1965, "New method of measuring reverberation time",
// JASA 37) and T20 / T30 by least-squares regression as ISO 3382-1:2009 defines them, with the
// noise floor handled by an iterative truncation point in the manner of Lundeby, Vigran, Bietz and
// Vorlaender 1995 ("Uncertainties of measurements in room acoustics", Acustica 81). Clause
// numbers of ISO 3382-1 below are from memory.
#pragma once

#include <cstddef>
#include <limits>
#include <span>
#include <vector>

namespace wane {

inline constexpr double not_measured = std::numeric_limits<double>::quiet_NaN();

/// Evaluation ranges of ISO 3382-1:2009, 3.5: T20 from -5 to -25 dB, T30 from -5 to -35 dB of
/// the Schroeder curve; the fitted slope is extrapolated to a 60 dB decay (T = -60 / slope).
inline constexpr double decay_eval_start_db = -5.0;
inline constexpr double t20_eval_end_db = -25.0;
inline constexpr double t30_eval_end_db = -35.0;
/// ISO 3382-1:2009, 5.3.3 (from memory): the bottom of the evaluation range must lie at least
/// 10 dB above the noise floor, i.e. 35 dB of range for T20 and 45 dB for T30.
inline constexpr double noise_margin_db = 10.0;

struct decay_params {
    double initial_block_s = 0.010;   ///< Lundeby step 1: first averaging interval (10..50 ms)
    double noise_tail_fraction = 0.1; ///< Lundeby step 2: last 10 % of the signal for the first noise estimate
    double first_fit_above_noise_db = 10.0;  ///< step 3: first regression down to noise + 10 dB
    double late_fit_top_above_noise_db = 25.0;    ///< step 8: late slope from noise + 25 dB ...
    double late_fit_bottom_above_noise_db = 5.0;  ///< ... down to noise + 5 dB
    double noise_start_below_crosspoint_db = 5.0; ///< step 7: noise taken from 5 dB of decay past the crosspoint
    double blocks_per_10db = 5.0;     ///< step 5: 3..10 intervals per 10 dB of decay
    double min_block_s = 0.001;       ///< shortest averaging interval
    int max_iterations = 5;           ///< Lundeby: at most 5 iterations
    bool compensate_tail = true;      ///< add the extrapolated energy beyond the crosspoint
};

/// A straight-line fit of a Schroeder curve over one evaluation range.
struct decay_fit {
    double t60_s = not_measured;            ///< -60 / slope; NaN when the range is not reached
    double slope_db_per_s = not_measured;
    double intercept_db = not_measured;     ///< line value at t = 0
    double correlation = not_measured;      ///< Pearson r of the fitted points (close to -1 is good)
    double from_s = not_measured, to_s = not_measured;  ///< times of the range's first and last point
};

/// Where the decay meets the noise floor (Lundeby-style iteration).
struct noise_crosspoint {
    bool found = false;                  ///< false: no decay above the noise; the whole signal is used
    std::size_t crosspoint_frames = 0;   ///< integration upper limit
    double noise_mean_square = 0.0;      ///< background noise power (mean of x^2)
    double late_slope_db_per_s = not_measured;
    int iterations = 0;
};

struct decay_times {
    double t20_s = not_measured;
    double t30_s = not_measured;
    decay_fit t20_fit, t30_fit;
    noise_crosspoint crosspoint;
    /// Peak block level over the noise floor in dB (the usable dynamic range of the decay).
    double dynamic_range_db = not_measured;
};

/// Schroeder backward integration, in dB re the total:
///   L[n] = 10 log10( (sum_{m=n}^{end-1} x[m]^2 + tail) / (sum_{m=0}^{end-1} x[m]^2 + tail) ),
/// n = 0 .. end-1, end = end_frames (<= x.size()); tail is energy (sum of squares) added beyond end.
/// A silent signal gives all -inf.
std::vector<double> schroeder_curve_db(std::span<const float> x, std::size_t end_frames, double tail_energy = 0.0);

/// Least-squares line through the curve's points from its first point at or below from_db to its
/// first point at or below to_db (both inclusive); NaN fields when to_db is not reached.
decay_fit fit_decay_range(std::span<const double> curve_db, double sample_rate_hz, double from_db, double to_db);

/// Iterative crosspoint of the decay with the background noise (Lundeby et al. 1995, steps 1-10).
noise_crosspoint find_noise_crosspoint(std::span<const float> x, double sample_rate_hz, const decay_params& params);

/// T20 and T30 of x (x[0] is the start of the decay, e.g. the onset): crosspoint, Schroeder curve
/// truncated there (with the tail compensation), regression over the ISO ranges. A time is NaN when
/// its range is not reached or the noise margin is not met.
decay_times measure_decay(std::span<const float> x, double sample_rate_hz, const decay_params& params = {});

}  // namespace wane

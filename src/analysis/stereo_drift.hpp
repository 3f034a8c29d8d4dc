// A partial's place between the channels over the whole note (analysis/stereo_place.hpp): its
// pan and spread from its channel amplitudes fitted on many spans, not two.
//
// Each span j (midpoint t_j, s after the onset) gives the partial's fitted amplitude in each
// channel, a_Lj and a_Rj (linear), and their level difference d_j = 20 log10(a_Rj / a_Lj) dB.
// - The pan follows the channels' energies over the spans that lie within the first
//   pan_span_s (sum_j a_Lj^2 against sum_j a_Rj^2), as the noise bands' pan does over the first
//   second: a level difference that moves within the onset's stretch is heard as its energy mean,
//   where the first span alone gave its first 0.15 s.
// - The spread (core/stereo.hpp: the difference's slope, dB/s) is the least-squares line through
//   the (t_j, d_j) of every span where the partial sounds, kept only where that line clearly
//   explains the points: at least min_points spans, the line's squared residual at most
//   (1 - min_explained) of the points' squared distance from the pan's constant difference, a move
//   of at least min_move_db over the spans and a slope of at least min_slope_db_per_s. A difference
//   that swings back and forth (two close modes beating with their own phase in each channel, a
//   piano's unison strings) keeps the constant pan: a line through two spans of such a swing, which
//   the format's spread extends to the end of the note, put piano_d4's 4th harmonic 31 dB to the
//   right at 3 s where the recording has it centred within 1 dB.
#pragma once

#include <optional>
#include <span>

namespace wane {

/// One span's fitted channel amplitudes of a partial (linear, > 0) at the span's midpoint.
struct channel_amplitudes {
    double time_s = 0.0;
    double left_amp = 0.0;
    double right_amp = 0.0;
};

struct drift_params {
    double pan_span_s = 1.0;          ///< spans ending within this time (s) set the pan
    int min_points = 3;               ///< spans a spread needs
    double min_explained = 0.75;      ///< share of the squared difference around the pan the line must explain
    double min_move_db = 3.0;         ///< the line's move across the spans (dB)
    double min_slope_db_per_s = 1.0;  ///< the line's slope (dB/s)
};

/// A partial's place from its spans: pan (core/stereo.hpp's law) at the attack's end and spread.
struct partial_drift {
    double pan = 0.0;
    double spread_db_per_s = 0.0;
};

/// The pan and spread of a partial from its spans (sorted by time; the first is the earliest),
/// the spread bounded by +-max_spread_db_per_s (neither channel may stop falling), the pan given
/// at attack_s where a spread is kept (the line's value there). span_s is the spans' length: a
/// span counts for the pan when time_s + span_s / 2 <= params.pan_span_s. Empty without a span.
std::optional<partial_drift> drift_of_spans(std::span<const channel_amplitudes> spans, double span_s, double attack_s,
                                            double max_spread_db_per_s, const drift_params& params);

}  // namespace wane

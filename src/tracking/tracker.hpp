// STFT peak tracking of a recorded note: onset, f0, partial tracks, inharmonicity.
// Owned by the Analysis I work; tracking_params gains fields as that work needs them.
#pragma once

#include <optional>
#include <span>

#include "core/analysis_error.hpp"
#include "tracking/track.hpp"

namespace wane {

struct tracking_params {
    /// Hint of the fundamental (--f0): numbers the harmonics and starts the series fit; the
    /// window, the tracking and so the partials found are the same with or without it.
    std::optional<double> f0_hz;
    std::optional<double> window_s;     ///< override the automatic window length (--window-s)
    std::optional<int> fft_size;        ///< override the FFT size (--fft-size)
    std::optional<double> hop_s;        ///< override the hop (--hop-s)
    int max_partials = 160;             ///< keep at most this many tracks, strongest first
    /// Past the faint_rank strongest tracks, a track is kept only when its peak is within
    /// faint_range_db of the strongest track's: a harpsichord's upper harmonics, 26-60 dB under
    /// its strongest, are heard, where the tracks 75-100 dB under a guitar's or piano's strongest
    /// are peaks of the noise floor that start seconds late (held-out notes, s39).
    int faint_rank = 80;
    double faint_range_db = 60.0;
};

/// Finds the onset, f0 and the partial tracks of a mono note. Throws analysis_error with
/// a user-facing message when there is nothing to track (e.g. "no partials above the noise floor").
///
/// Steps (tracking/tracker.cpp): the DC offset (file mean) is removed; the onset is the first
/// rise of the 2 ms block energy (tracking/onset.hpp); a 0.2 s Blackman-Harris survey after the
/// onset gives peaks for the pitch sieve (tracking/pitch.hpp); the window is
/// 8 periods of f0 (or of the closest strong pair / lowest strong partial when not harmonic),
/// 8 ms..0.25 s, the FFT the next 2/3/5-smooth size >= 2 windows, the hop window/4 in 4..12.5 ms;
/// frames centred at onset + k hop while the window fits in the file. Peaks (spectrum/peaks.hpp)
/// 6 dB above the running noise floor continue tracks, 12 dB above start them; tracks match
/// greedily by frequency distance within max(2 bins, 1% of f) (<= 0.3 f0), harmonic tracks keep
/// their number on n f0 sqrt(1 + B n^2); gaps up to 3 frames are bridged; tracks shorter than
/// max(5 frames, 1.5 windows) are dropped; fragments of one partial up to 0.3 s apart are joined
/// (gap interpolated); frames stop 0.5 s after the last track ended. Harmonic numbers and B are
/// refitted on the tracks (range grown from 10 f0, numbers chained upward; started from the hint
/// when given) by the robust series fit of pitch/series_fit.hpp. Refuses (analysis_error):
/// too short, NaN/Inf, constant (silence/DC), clipped, nothing above the noise floor.
/// Tracks come out sorted by frequency; time_s of their points counts from onset_s.
tracking_result track_note(std::span<const float> samples, double sample_rate_hz,
                           const tracking_params& params);

/// A track's frequency: the amplitude-weighted median over its settled part (from
/// max(0.1 s, 2 windows) after the onset, points 20 dB above the floor), so the loud early part,
/// where the pitch is heard, counts most; the plain median of all points when that part is empty.
/// window_s is the analysis window the track was measured with (tracking_result::window_s).
double track_frequency_hz(const partial_track& track, double window_s);

}  // namespace wane

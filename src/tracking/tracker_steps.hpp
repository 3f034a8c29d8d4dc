// The steps of track_note (tracking/tracker.hpp), one file each: the survey and the window choice
// (tracker.cpp), the frame loop (frame_loop.cpp), joining fragments (track_joining.cpp), ranking
// and labelling the tracks (track_labelling.cpp). Internal to src/tracking.
#pragma once

#include <cstdint>
#include <optional>
#include <span>
#include <string>
#include <vector>

#include "core/analysis_error.hpp"
#include "pitch/series_fit.hpp"
#include "tracking/track.hpp"

namespace wane::tracker_steps {

[[noreturn]] inline void refuse(const std::string& why) { throw analysis_error(why); }

/// The frames' layout: window length and FFT size in samples, hop in samples.
struct frame_grid {
    int window_length = 0;
    int fft_size = 0;
    std::int64_t hop = 0;
};

/// Tracks found by the frame loop, with each track's strongest level (dBFS).
struct frame_tracks {
    std::vector<partial_track> tracks;
    std::vector<double> peak_db;
};

/// The frame loop: STFT frames from the onset, peaks over a running noise floor, McAulay-Quatieri
/// matching with harmonic guidance on the series (f0_hz, b); stops 0.5 s after the last track
/// ended. Fills result.floor_db and result.floor_band_hz. Refuses a file too short for the window.
frame_tracks run_frames(std::span<const float> x, double fs, std::int64_t onset, float dc, const frame_grid& grid,
                        double f0_hz, double b, int max_partials, tracking_result& result);

/// Appends `frames` interpolated points after the track's last one, toward `next` (the next real
/// point, one hop after the last inserted): frequency, level and floor linear, the phase advanced
/// by 2 pi f hop at the mean frequency of each step.
void bridge_gap(partial_track& track, int frames, const track_point& next, double hop_s);

/// Joins fragments of one partial: a track starting within max_gap_s after another ended, at a
/// frequency within rel_tol of where that one stopped, continues it (the gap bridged). Fragments
/// come from a partial dipping into the noise (beating) for longer than the frame bridging allows.
void join_fragments(std::vector<partial_track>& tracks, std::vector<double>& peak_db, double hop_s,
                    double max_gap_s, double rel_tol);

/// The robust series fit (pitch/series_fit.hpp) over labelled partials; where several partials
/// carry one number only the one of largest weight counts (the others are a fragment or a
/// neighbour of it).
series_fit fit_labelled_series(const std::vector<int>& harmonic, const std::vector<double>& freq_hz,
                               const std::vector<double>& weight);

/// Which tracks are kept: at most max_partials, strongest (peak level) first; past the
/// faint_rank strongest only those within faint_range_db of the strongest (tracking_params).
struct track_keep {
    int max_partials = 0;
    int faint_rank = 0;
    double faint_range_db = 0.0;
};

/// The number of tracks kept of `strength_desc` (each track's peak level, dB, strongest first).
std::size_t kept_track_count(std::span<const double> strength_desc, const track_keep& keep);

/// Keeps the strongest tracks (track_keep), labels them with harmonic numbers on the refitted
/// series, and fills result.tracks (by frequency), series_f0_hz, inharmonicity_b and f0_hz.
void label_tracks(std::vector<partial_track>& done, double f0_hz, double b, std::optional<double> f0_override,
                  const track_keep& keep, tracking_result& result);

}  // namespace wane::tracker_steps

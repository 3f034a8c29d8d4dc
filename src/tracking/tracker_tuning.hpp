// The tracker's tuning, named once for all its steps (tracker.cpp, frame_loop.cpp,
// track_joining.cpp, track_labelling.cpp). Common-practice choices, not from a source.
#pragma once

namespace wane::tracker_tuning {

inline constexpr double min_duration_s = 0.05;        ///< shortest input accepted
inline constexpr double survey_window_s = 0.2;        ///< long window of the survey (resolves 25 Hz)
inline constexpr int survey_frames = 3;               ///< survey frames, half a window apart
inline constexpr double survey_above_floor_db = 12.0;
inline constexpr double periods_per_window = 8.0;     ///< window = this many periods of the spacing
inline constexpr double min_window_s = 0.008;
inline constexpr double max_window_s = 0.25;
inline constexpr int zero_padding = 2;                ///< FFT size >= this x window length
inline constexpr double min_hop_s = 0.004;
inline constexpr double max_hop_s = 0.0125;          ///< the FFTs are most of the cost: 12.5 ms keeps 83% overlap at 8 periods of 110 Hz
inline constexpr double hop_per_window = 0.25;
inline constexpr double continue_above_floor_db = 6.0;  ///< a track continues on peaks this far up
inline constexpr double birth_above_floor_db = 12.0;    ///< a track is born only this far up
inline constexpr double birth_below_max_db = 80.0;      ///< ... and within this of the frame's strongest
inline constexpr double cut_above_floor_db = 10.0;      ///< still sounding at the end: cut, not decayed
inline constexpr double quiet_stop_s = 0.5;             ///< stop after this long with no track alive
inline constexpr double dev_rel = 0.01;                 ///< frequency deviation per hop, relative
inline constexpr double dev_min_bins = 2.0;             ///< ... but at least this many FFT bins
inline constexpr double dev_max_f0 = 0.3;               ///< ... and at most this fraction of f0
inline constexpr int max_gap_frames = 3;                ///< gaps up to this many frames are bridged
inline constexpr int min_track_frames = 5;              ///< a track lasts at least this many frames
inline constexpr double min_track_windows = 1.5;        ///< ... and at least this many window lengths
/// A short note (under this long after the onset) keeps shorter tracks: its upper harmonics last
/// only a few frames, and the long rule above would drop them all (a 0.21 s clavinet kept 24 tracks).
inline constexpr double short_note_s = 0.5;
inline constexpr int short_min_track_frames = 3;        ///< a short note's track lasts this many frames
inline constexpr double short_min_track_windows = 0.5;  ///< ... and this many window lengths
inline constexpr double max_join_gap_s = 0.3;           ///< fragments of one partial this close are joined
inline constexpr double join_rel_tol = 0.005;           ///< ... when their frequencies meet within this
inline constexpr double harmonic_tolerance_rel = 0.02;  ///< labelling tracks with harmonic numbers
inline constexpr double guide_tolerance_rel = 0.04;     ///< harmonic tracks stay this close to n f0 s_n
inline constexpr int b_fit_rounds = 3;
/// A series is the sound's pitch only when it carries what is heard over 0.1-1.1 s after the onset
/// (the heard span, pitch/root.hpp): the track heard most there is numbered, and so is another
/// one with a different number heard within this of it.
inline constexpr double series_heard_below_db = 30.0;
inline constexpr double first_label_harmonics = 10.0;   ///< the series is first fitted up to 10 f0
inline constexpr double max_snr_weight_db = 40.0;       ///< B fit: weight by SNR, capped here
inline constexpr double attack_skip_s = 0.1;             ///< a track's frequency: median after this,
inline constexpr double attack_skip_windows = 2.0;       ///< ... and after this many windows,
inline constexpr double settled_snr_db = 20.0;           ///< ... over points this far above the floor

}  // namespace wane::tracker_tuning

// How a recording ends: the note decays into the floor, the recording was cut while the note still
// sounds (most sample sets store notes that way), or the note holds a steady level (a sustained
// tone). A cut must not be read as a held level or as a decay: the analysis fits each partial's
// decay on what was recorded and continues it past the cut (analysis/cut_tail.hpp).
#pragma once

#include <span>

namespace wane {

struct recording_end_params {
    double frame_s = 0.02;  ///< level frames: RMS over this long ...
    double hop_s = 0.01;    ///< ... every this often
    /// The level at the end is the power mean over this last stretch of the recording.
    double end_window_s = 0.1;
    /// A recording whose end is less than this far below its loudest frame stops while the note
    /// still sounds. Reasoned choice: a note that decays naturally ends in its noise floor, more
    /// than 50 dB down on a 16-bit recording (the shared real notes: natural ends 56-83 dB below
    /// the peak, cut ones 6-32 dB).
    double cut_within_db = 45.0;
    /// A note holds when its level stays within +-hold_tolerance_db of the end level for at least
    /// hold_min_s before the end (a decay of 1 dB/s leaves that band within a second).
    double hold_min_s = 1.0;
    double hold_tolerance_db = 1.0;
};

enum class end_kind { decays, cut, holds };

struct recording_end {
    end_kind kind = end_kind::decays;
    double end_below_peak_db = 0.0;  ///< level of the end stretch under the loudest frame, dB (>= 0)
    double held_s = 0.0;             ///< how long before the end the level stays within the tolerance
    double length_s = 0.0;           ///< length of the analysed note (the cut, when it is one)
};

/// Classifies the end of note (note[0] is the onset, note.back() the recording's last sample).
recording_end classify_recording_end(std::span<const float> note, double sample_rate_hz,
                                     const recording_end_params& params = {});

}  // namespace wane

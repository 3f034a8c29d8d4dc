// Checks on the input signal before tracking.
#pragma once

#include <span>

namespace wane {

struct clipping_params {
    int min_run_samples = 3;  ///< a flat top holds the extreme value this many samples or more
    /// ... and is entered by a step of at least this fraction of the peak: a clean waveform slows
    /// down before its peak (a 16-bit low sine may repeat its peak value, but by 1 LSB steps).
    double min_entry_step = 0.002;
    int min_runs = 3;         ///< the file counts as clipped from this many flat tops on
    /// Only extremes at least this loud count (-6 dBFS): quiet, coarsely quantized or dithered
    /// signals repeat their extreme values without being clipped.
    double min_level_lin = 0.5;
};

struct clipping_report {
    int runs = 0;             ///< flat tops found at the positive or negative extreme
    double peak_lin = 0.0;    ///< largest |sample|
    bool clipped = false;
};

/// Flat tops: runs of >= min_run_samples samples equal to the file's maximum (or minimum), when
/// that extreme is at least min_level_lin, entered by a step of >= min_entry_step x peak.
clipping_report find_clipping(std::span<const float> samples, const clipping_params& params = {});

}  // namespace wane

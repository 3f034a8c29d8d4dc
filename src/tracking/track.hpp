// Partial tracks: what the STFT peak tracker hands to the envelope fit.
#pragma once

#include <vector>

#include "spectrum/window.hpp"

namespace wane {

/// One frame of a partial track. time_s counts from the note's onset (frame centre).
struct track_point {
    double time_s = 0.0;
    double freq_hz = 0.0;
    double level_db = 0.0;    ///< peak level in dBFS (0 dBFS = full-scale sinusoid)
    double phase_rad = 0.0;   ///< phase of cos at the frame centre, at freq_hz
    double floor_db = 0.0;    ///< local noise-floor estimate at this frequency, dBFS
};

struct partial_track {
    std::vector<track_point> points;  ///< consecutive frames (gaps bridged by interpolation)
    int harmonic = 0;                 ///< harmonic number, 0 when not on the harmonic series
    /// True when the track was still sounding when the file ended (a cut, not a decay).
    bool cut_by_end = false;
};

struct tracking_result {
    std::vector<partial_track> tracks;
    double onset_s = 0.0;      ///< note onset in the source, seconds from the file start
    /// The fundamental of the fitted series (= series_f0_hz); 0 when the sound has no harmonic
    /// series. With an f0 hint the series is started from the hint.
    double f0_hz = 0.0;
    /// f0 of the stiff-string series n f0 sqrt(1 + B n^2) fitted to the labelled tracks (robust
    /// weighted fit, pitch/series_fit.hpp); the harmonic numbers follow this series.
    double series_f0_hz = 0.0;
    double inharmonicity_b = 0.0;  ///< Fletcher's B of that series (0 when not harmonic)
    window_kind window = window_kind::blackman_harris_4;  ///< the analysis window of the frames
    double hop_s = 0.0;
    double window_s = 0.0;
    int fft_size = 0;
    /// Noise floor per frequency region: floor_db[i] covers [i, i+1) * floor_band_hz.
    std::vector<double> floor_db;
    double floor_band_hz = 0.0;
};

}  // namespace wane

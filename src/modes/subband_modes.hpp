// Modes of the first part of a note, found in subbands (Laroche 1993): the segment is shifted to
// baseband around each band centre, low-passed and decimated, so each band holds a few modes in a
// few hundred samples, and ESPRIT (modes/esprit.hpp) finds their poles there. What the STFT
// tracker cannot see: modes that live 10-100 ms.
//
// Bands: centres c_i = i * band_hz / 2 (i = 0, 1, ...), so neighbours overlap by half; a band keeps
// only the modes in its central half [c_i - band_hz / 4, c_i + band_hz / 4), so each frequency
// belongs to one band. Baseband signal of band i (n counts samples from the segment start):
//   y_i[m] = sum_{j=0}^{T-1} h[j] x[mD + j] exp(-i 2 pi c_i (mD + j) / fs),
// h a Blackman-windowed sinc low-pass of cutoff band_hz / 2 and T = 8 fs / band_hz taps, decimated
// by D = floor(fs / (2 band_hz)), so components that alias land outside the central half. Every
// output uses samples of the segment only, so y_i is again a sum of the same damped exponentials:
// a pole z_b of y_i maps back to f = c_i + arg(z_b) fs / (2 pi D), decay = -ln|z_b| fs / D.
#pragma once

#include <span>
#include <vector>

#include "modes/damped_mode.hpp"
#include "modes/esprit.hpp"

namespace wane {

struct subband_mode_params {
    double span_s = 0.2;          ///< analysed segment from the onset, seconds
    double band_hz = 1000.0;      ///< subband width (the caller scales it to the partial density)
    double max_freq_hz = 20000.0; ///< no band above this (nor above 0.45 fs)
    /// Bands whose baseband energy is further than this below the strongest band's are skipped.
    double band_range_db = 70.0;
    double min_freq_hz = 20.0;    ///< modes below are dropped (DC and rumble)
    double min_t60_s = 0.004;     ///< modes dying faster are dropped (the filter cannot see them)
    esprit_params esprit{};
};

/// Poles (freq_hz, decay_per_s; amp left 0) of the modes of x (x[0] at the onset), ascending in
/// frequency. Growing poles (decay < 0) are kept: the caller decides what they mean.
std::vector<damped_mode> find_subband_modes(std::span<const float> x, double sample_rate_hz,
                                            const subband_mode_params& params);

}  // namespace wane

// Modes of the first part of a note, found in subbands (Laroche 1993): the segment is shifted to
// baseband around each band centre, low-passed and decimated, so each band holds a few modes in a
// few hundred samples, and ESPRIT (modes/esprit.hpp) finds their poles there. What the STFT
// tracker cannot see: modes that live 10-100 ms.
//
// Computed in the time domain, by the sum below itself: the heterodynes w_i^j of all bands repeat
// every P samples (P the least with P band_hz / (2 fs) whole: 96 at 48 kHz, 64 at 32 kHz; none
// within the taps at 44.1 kHz), so the windowed segment h[j] x[mD + j] is first folded onto
// P taps (the terms sharing a phase summed) and every output is the dot product of that with
// the band's w_i^r (r < P), times w^(mD) (a rotation per output, re-anchored every 64): O(T) per
// output for the fold, O(min(T, P)) per band, T samples of the segment only; all bands' dot
// products as one matrix product (folded segment rows times the bands' phase columns; at 48 kHz
// a quarter of the multiply-adds of the unfolded sum). The segment is filtered once for the longest span asked; a shorter
// span's band signals are the first outputs (subband_modes).
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

#include <complex>
#include <cstddef>
#include <span>
#include <vector>

#include "modes/damped_mode.hpp"
#include "modes/esprit.hpp"

namespace wane {

struct subband_mode_params {
    double span_s = 0.2;          ///< analysed segment from the onset, seconds
    double band_hz = 1000.0;      ///< subband width (the caller scales it to the partial density)
    double max_freq_hz = 20000.0; ///< no band above this (nor above 0.45 fs)
    /// Bands whose baseband energy is further than this below the strongest band's are skipped
    /// (50 dB: 12% fewer subband instructions on the demo note, the 17 real notes' fidelity and
    /// texture figures as at 55; 45 moved glockenspiel_g6's LSD up 0.31 dB).
    double band_range_db = 50.0;
    double min_freq_hz = 20.0;    ///< modes below are dropped (DC and rumble)
    double min_t60_s = 0.004;     ///< modes dying faster are dropped (the filter cannot see them)
    esprit_params esprit{};
};

/// The band signals y_i of the first params.span_s of x (x[0] at the onset).
struct subband_signals {
    double rate_hz = 0.0;        ///< of y: fs / D
    double input_rate_hz = 0.0;  ///< fs
    std::size_t decimation = 1;  ///< D
    std::size_t taps = 0;        ///< T
    double band_hz = 0.0;
    struct band {
        double centre_hz = 0.0;
        std::vector<std::complex<double>> y;
    };
    std::vector<band> bands;     ///< every band, ascending centres
};
subband_signals make_subband_signals(std::span<const float> x, double sample_rate_hz, const subband_mode_params& params);

/// Poles (freq_hz, decay_per_s; amp left 0) of the modes of the first span_s of the signals'
/// segment (the outputs whose taps lie within it: the same signals as a segment of span_s alone
/// gives), ascending in frequency. Growing poles (decay < 0) are kept: the caller decides what they
/// mean. With near_hz given, only the bands whose central half comes within near_tol_hz of one of
/// its frequencies are searched (the same poles there as a search of all bands).
std::vector<damped_mode> subband_modes(const subband_signals& signals, const subband_mode_params& params, double span_s,
                                       std::span<const double> near_hz = {}, double near_tol_hz = 0.0);

/// subband_modes of make_subband_signals(x, ..) over params.span_s.
std::vector<damped_mode> find_subband_modes(std::span<const float> x, double sample_rate_hz,
                                            const subband_mode_params& params);

}  // namespace wane

// Noise bands of the deterministic-plus-stochastic model (Serra and Smith 1990): the part of a
// note that partials cannot carry, kept as band-limited noise with an envelope per band.
//
// Band layout: one-third-octave bands with the base-10 octave ratio G = 10^(3/10), exact mid-band
// frequencies f_m = 1000 G^(k/3) (IEC 61260-1:2014, nominal centres ISO 266) and edges
// f_m G^(+-1/6), 125 Hz .. 20 kHz, plus one band from 20 Hz to the 125 Hz band's lower edge.
// Reasoned choice: a third octave follows the spectral shape of a hammer, pick or mallet (above
// 500 Hz it is about one critical band: ERB = 24.7 (4.37 f / 1 kHz + 1) Hz, Glasberg and Moore
// 1990), while below 125 Hz third-octave bands would hold too few analysis bins to measure.
//
// Level: a band's level in dB is 10 log10 of the band-limited noise signal's mean power (so a
// band at 0 dB has RMS 1.0), i.e. dB re an RMS of full scale; the envelope's peak_db is that level.
//
// STFT power <-> band power (one home for both the analysis and the synthesis), for a real frame
// of N samples with window w and DFT X[k] = sum_n w[n] x[n] e^{-j 2 pi k n / N} (no scaling):
//   analysis:  E|X[k]|^2 = S * sum(w^2), where S = band power / (2 K / N) is the two-sided power
//              per bin of noise spread evenly over the band's K bins, so
//              band power = mean_k |X[k]|^2 * 2 K / (N sum(w^2));
//   synthesis: frames with bin magnitude a and random phase, inverse DFT with 1/N, multiplied by
//              window w and overlap-added at hop H give mean power 2 K a^2 / N^2 * sum(w^2) / H,
//              so a^2 = band power * N^2 H / (2 K sum(w^2)).
#pragma once

#include <cmath>
#include <vector>

#include "core/octave_bands.hpp"  // octave_ratio_base10, octave_reference_hz

namespace wane {

struct band_edges {
    double low_hz = 0.0;
    double high_hz = 0.0;
};

/// The noise-band layout above (one-third octaves), keeping the bands whose lower edge is below
/// max_hz (upper edges clipped to max_hz).
std::vector<band_edges> noise_band_layout(double max_hz);

/// Band power from the mean bin power of a band's bins (formula above).
inline double band_power_from_bins(double mean_bin_power, int band_bins, int fft_size, double window_power_sum) {
    return mean_bin_power * 2.0 * band_bins / (fft_size * window_power_sum);
}

/// Squared bin magnitude that synthesizes a band power (formula above).
inline double bin_power_for_band(double band_power, int band_bins, int fft_size, int hop, double window_power_sum) {
    return band_power * static_cast<double>(fft_size) * fft_size * hop / (2.0 * band_bins * window_power_sum);
}

}  // namespace wane

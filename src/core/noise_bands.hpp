// Noise bands of the deterministic-plus-stochastic model (Serra and Smith 1990): the part of a
// note that partials cannot carry, kept as band-limited noise with an envelope per band.
//
// Band layout: octave bands with base-10 octave ratio G = 10^(3/10) and exact mid-band
// frequencies f_m = 1000 G^k (IEC 61260-1:2014, nominal centres ISO 266), edges f_m G^(+-1/2),
// 125 Hz .. 16 kHz, plus one band from 20 Hz to the 125 Hz band's lower edge. Reasoned choice:
// attack noise is broadband and heard coarsely, so octave resolution keeps the patch small (at
// most 9 bands) and each band holds several STFT bins even at the low end.
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

#include "core/octave_bands.hpp"  // octave_ratio_base10

namespace wane {

struct band_edges {
    double low_hz = 0.0;
    double high_hz = 0.0;
};

/// The noise-band layout above, keeping the bands whose lower edge is below max_hz (upper edges
/// clipped to max_hz).
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

// Narrow bands of a whole note at a low rate, from one FFT of the note: the bins around a centre
// frequency, tapered, moved to 0 Hz and inverse transformed at a small size. Over seconds of
// signal that is a few hundred complex samples per band, where a pencil of order 2 can split two
// modes a fraction of a hertz apart (the resolution comes from the span, the cost from the rate).
//
// With X[k] the DFT of x (size M >= N, zero padded) and k_c the bin nearest centre_hz, band b is
//   y[m] = (1/M) sum_{|j| <= J} T(j) X[k_c + j] exp(i 2 pi j m / P),   m = 0 .. P-1,
// so sample m is time t = m M / (P fs) after x[0], and a component A cos(2 pi f t + phi) e^{-d t}
// inside the band reads y[m] = (A / 2) exp(i phi) exp((-d + i 2 pi (f - f_c)) t), f_c = k_c fs / M
// (the analytic signal shifted by f_c), with T = 1 over the inner half-width and a raised cosine
// to 0 at J bins. The transform is circular: the last 1 / (half_width_hz) s wrap onto the first.
#pragma once

#include <complex>
#include <cstddef>
#include <memory>
#include <span>
#include <vector>

namespace wane {

struct narrowband {
    double centre_hz = 0.0;      ///< f_c, the frequency moved to 0 Hz
    double sample_rate_hz = 0.0; ///< rate of y: P fs / M
    std::vector<std::complex<double>> y;
};

class note_spectrum {
public:
    /// One real FFT of x at sample_rate_hz (x[0] is time 0), x read as zero padded to
    /// padded_frames (0: x.size()) as if those zeros were part of it.
    note_spectrum(std::span<const float> x, double sample_rate_hz, std::size_t padded_frames = 0);
    ~note_spectrum();
    note_spectrum(const note_spectrum&) = delete;
    note_spectrum& operator=(const note_spectrum&) = delete;
    /// The band of half-width half_width_hz around centre_hz, sampled at no less than
    /// min_rate_hz (rounded up to a fast FFT size); empty when the band leaves [0, fs/2].
    narrowband band(double centre_hz, double half_width_hz, double min_rate_hz) const;
    /// Energy of the signal between low_hz and high_hz (sum of x^2 over time by Parseval,
    /// positive frequencies counted twice).
    double energy_between(double low_hz, double high_hz) const;
    /// The DFT bins X[k] (forward, size fft_size(), zero padded) that energy_between counts for
    /// [low_hz, high_hz]; first_bin gets the index k of the first.
    std::vector<std::complex<double>> bins_between(double low_hz, double high_hz, long& first_bin) const;
    int fft_size() const;
    /// Length of the analysed signal, seconds.
    double duration_s() const;

private:
    struct state;
    std::unique_ptr<state> state_;
};

}  // namespace wane

// Analysis windows (cosine sums) and the bias correction of quadratic peak interpolation (QIFFT)
// that each window needs.
#pragma once

#include <span>
#include <string_view>
#include <vector>

namespace wane {

enum class window_kind {
    hann,               ///< 0.5 - 0.5 cos
    hamming,            ///< 0.54 - 0.46 cos
    blackman_harris_4,  ///< 4-term, -92 dB sidelobes (Harris 1978)
};

std::string_view window_name(window_kind kind);

/// Cosine-sum coefficients a_k of w(x) = sum_k (-1)^k a_k cos(2 pi k x), x in [0, 1] across the
/// window. Hann and Hamming: the classic values; Blackman-Harris 4-term: Harris 1978, eq. (33)
/// (0.35875, 0.48829, 0.14128, 0.01168).
std::span<const double> window_coefficients(window_kind kind);

/// Value of the window at position x in [0, 1] (0 and 1 are the two ends).
double window_value(window_kind kind, double x);

enum class window_symmetry {
    symmetric,  ///< w(n) = window_value(n / (N - 1)): odd N has a centre sample (STFT frames)
    periodic,   ///< w(n) = window_value(n / N): "DFT-even" of Harris 1978 (window tables)
};

/// N samples of the window, stored as float.
std::vector<float> make_window(window_kind kind, int length, window_symmetry symmetry);

/// Zero-phase window transform W(nu) of an odd-length symmetric window (h = (N-1)/2 samples each
/// side of the centre), evaluated at nu FFT bins of an M-point FFT:
/// W(nu) = w_c + 2 sum_{m=1..h} w_{c+m} cos(2 pi nu m / M). Real because the window is symmetric.
double zero_phase_transform(std::span<const float> window, int fft_size, double nu_bins);

/// Transform of the centred cosine-sum window in the continuous limit, at u cycles per window span
/// T (u = nu_bins * T / fft_size, T = N - 1 samples for the symmetric window), normalized to 1 at
/// u = 0: sum_k a_k (sinc(u - k) + sinc(u + k)) / 2 (k = 0 term a_0 sinc(u)) over a_0,
/// sinc(x) = sin(pi x) / (pi x). Centring turns the (-1)^k signs of window_value into +.
double cosine_sum_transform(window_kind kind, double u);

/// Correction of QIFFT on the dB magnitude (Abe and Smith 2004): the parabola through the peak bin
/// and its neighbours places the peak at p (in [-0.5, 0.5] FFT bins) with height y; for a
/// stationary sinusoid the true offset and height differ by a bias that depends only on the window
/// and the zero-padding. The table holds that bias, computed once from the window's transform
/// (continuous limit, cosine_sum_transform; sampled true offsets -> p, inverted onto a uniform p grid).
class qifft_correction {
public:
    /// Tabulates the bias of a symmetric window of window_length samples in an fft_size-point FFT.
    qifft_correction(window_kind kind, int window_length, int fft_size);

    struct result {
        double offset_bins;  ///< corrected offset of the true peak from the peak bin
        double level_db;     ///< corrected peak height, dB (same scale as the input values)
    };
    /// Interpolates the peak from dB values at bins k-1, k, k+1 (k the local maximum).
    result interpolate(double left_db, double centre_db, double right_db) const;

private:
    static constexpr int table_points = 257;
    std::vector<double> offset_of_p_;    ///< true offset at p = -0.5 + i / (table_points - 1)
    std::vector<double> level_fix_db_;   ///< true height - parabola height at the same p
};

/// qifft_correction(kind, window_length, fft_size), the last few a thread made kept and copied
/// out as make_window's windows: each analysis asks for the tracker survey's and frames' again.
qifft_correction made_qifft_correction(window_kind kind, int window_length, int fft_size);

}  // namespace wane

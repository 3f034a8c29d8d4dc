#include "spectrum/window.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <vector>

#include "core/cosine_walk.hpp"
#include "core/recent_values.hpp"
#include "core/units.hpp"

namespace wane {

namespace {

constexpr std::array<double, 2> hann_coeffs{0.5, 0.5};
constexpr std::array<double, 2> hamming_coeffs{0.54, 0.46};
// Harris 1978, "On the use of windows for harmonic analysis with the DFT", 4-term -92 dB window.
constexpr std::array<double, 4> bh4_coeffs{0.35875, 0.48829, 0.14128, 0.01168};

// The parabola through (-1, a), (0, b), (1, c): vertex offset and height.
struct parabola_vertex {
    double p;
    double height;
};
parabola_vertex fit_parabola(double a, double b, double c) {
    const double denom = a - 2.0 * b + c;
    if (denom >= 0.0) return {0.0, b};  // not a maximum (flat): keep the bin
    const double p = 0.5 * (a - c) / denom;
    return {p, b - 0.25 * (a - c) * p};
}

}  // namespace

std::string_view window_name(window_kind kind) {
    switch (kind) {
        case window_kind::hann: return "hann";
        case window_kind::hamming: return "hamming";
        case window_kind::blackman_harris_4: return "blackman-harris-4";
    }
    return "?";
}

std::span<const double> window_coefficients(window_kind kind) {
    switch (kind) {
        case window_kind::hann: return hann_coeffs;
        case window_kind::hamming: return hamming_coeffs;
        case window_kind::blackman_harris_4: return bh4_coeffs;
    }
    return hann_coeffs;
}

double window_value(window_kind kind, double x) {
    const auto a = window_coefficients(kind);
    double w = 0.0;
    double sign = 1.0;
    for (std::size_t k = 0; k < a.size(); ++k) {
        w += sign * a[k] * std::cos(two_pi * static_cast<double>(k) * x);
        sign = -sign;
    }
    return w;
}

namespace {

/// make_window's samples, computed (a cosine per sample).
std::vector<float> compute_window(window_kind kind, int length, window_symmetry symmetry) {
    std::vector<float> w(static_cast<std::size_t>(length));
    const double denom = symmetry == window_symmetry::symmetric ? length - 1.0 : double(length);
    // window_value's sum with one cosine per sample: cos(2 pi k x) = T_k(cos(2 pi x)) (Chebyshev,
    // T_0 = 1, T_{k+1} = 2 c T_k - T_{k-1}); the same as window_value for the two-term windows, a
    // few 1e-17 from it for the four-term one (under a float's rounding of the result).
    const auto a = window_coefficients(kind);
    for (int n = 0; n < length; ++n) {
        const double c = std::cos(two_pi * (n / denom));
        double t_prev = 1.0, t = c;
        double sum = a[0];
        double sign = -1.0;
        for (std::size_t k = 1; k < a.size(); ++k) {
            sum += sign * a[k] * t;
            sign = -sign;
            const double next = 2.0 * c * t - t_prev;
            t_prev = t;
            t = next;
        }
        w[static_cast<std::size_t>(n)] = static_cast<float>(sum);
    }
    return w;
}

/// The windows a thread made last (core/recent_values.hpp): an analysis asks for the same few
/// again (the tracker's frames, the noise model's floor and attack STFTs and their leakage tables;
/// each analysis of a batch the same), so each is computed once (4.2 M instructions of cosines per
/// analysis of the synthetic note otherwise). At most 8 kept.
struct window_key {
    window_kind kind;
    int length;
    window_symmetry symmetry;
    bool operator==(const window_key&) const = default;
};

}  // namespace

std::vector<float> make_window(window_kind kind, int length, window_symmetry symmetry) {
    assert(length >= 2);
    thread_local recent_values<window_key, std::vector<float>, 8> made;
    return made.get({.kind = kind, .length = length, .symmetry = symmetry},
                    [&] { return compute_window(kind, length, symmetry); });
}

double zero_phase_transform(std::span<const float> window, int fft_size, double nu_bins) {
    assert(window.size() % 2 == 1);
    const std::size_t h = window.size() / 2;
    double sum = window[h];
    const double step = two_pi * nu_bins / fft_size;
    cosine_walk cos_m(step, 1.0);  // cos(step m)
    cos_m.next();                  // m = 0: the centre tap, summed above
    for (std::size_t m = 1; m <= h; ++m) {
        const double c = cos_m.next();
        sum += 2.0 * double(window[h + m]) * c;
    }
    return sum;
}

double cosine_sum_transform(window_kind kind, double u) {
    const auto sinc = [](double v) { return v == 0.0 ? 1.0 : std::sin(pi * v) / (pi * v); };
    const auto a = window_coefficients(kind);
    double sum = a[0] * sinc(u);
    for (std::size_t k = 1; k < a.size(); ++k) {
        const double kd = static_cast<double>(k);
        sum += 0.5 * a[k] * (sinc(u - kd) + sinc(u + kd));
    }
    return sum / a[0];
}

qifft_correction::qifft_correction(window_kind kind, int window_length, int fft_size)
    : offset_of_p_(table_points), level_fix_db_(table_points) {
    assert(window_length >= 3 && fft_size >= window_length);
    const double u_per_bin = double(window_length - 1) / fft_size;
    // Sample true offsets delta in [-0.5, 0.5]; the parabola's p(delta) is odd and increasing.
    constexpr int samples = 2 * table_points;
    std::vector<double> p_of_delta(samples + 1), delta(samples + 1), fix(samples + 1);
    const auto db = [&](double nu) {
        return 20.0 * std::log10(std::max(std::abs(cosine_sum_transform(kind, nu * u_per_bin)), 1e-300));
    };
    const double true_db = db(0.0);
    for (int i = 0; i <= samples; ++i) {
        const double d = -0.5 + double(i) / samples;
        // A sinusoid at bin offset d reads W(k - d) at bins k = -1, 0, 1.
        const auto v = fit_parabola(db(-1.0 - d), db(-d), db(1.0 - d));
        delta[i] = d;
        p_of_delta[i] = v.p;
        fix[i] = true_db - v.height;
    }
    // Invert onto the uniform p grid (linear interpolation; p is monotonic in delta).
    std::size_t j = 0;
    for (int i = 0; i < table_points; ++i) {
        const double p = -0.5 + double(i) / (table_points - 1);
        while (j + 2 < p_of_delta.size() && p_of_delta[j + 1] < p) ++j;
        const double span = p_of_delta[j + 1] - p_of_delta[j];
        const double t = span > 0.0 ? std::clamp((p - p_of_delta[j]) / span, 0.0, 1.0) : 0.0;
        offset_of_p_[i] = delta[j] + t * (delta[j + 1] - delta[j]);
        level_fix_db_[i] = fix[j] + t * (fix[j + 1] - fix[j]);
    }
}

qifft_correction made_qifft_correction(window_kind kind, int window_length, int fft_size) {
    // The same table as made anew (a copy of the one computed for these arguments); without it a
    // bench_analyze repeat of the synthetic note computed the survey's and the frames' tables
    // again (callgrind: 2.9 M instructions per analysis, cosine_sum_transform's sines).
    struct table_key {
        window_kind kind;
        int window_length;
        int fft_size;
        bool operator==(const table_key&) const = default;
    };
    thread_local recent_values<table_key, qifft_correction, 4> tables;
    return tables.get({.kind = kind, .window_length = window_length, .fft_size = fft_size},
                      [&] { return qifft_correction(kind, window_length, fft_size); });
}

qifft_correction::result qifft_correction::interpolate(double left_db, double centre_db,
                                                       double right_db) const {
    const auto v = fit_parabola(left_db, centre_db, right_db);
    const double pos = (std::clamp(v.p, -0.5, 0.5) + 0.5) * (table_points - 1);
    const auto i = std::min(static_cast<std::size_t>(pos), std::size_t{table_points - 2});
    const double t = pos - double(i);
    return {offset_of_p_[i] + t * (offset_of_p_[i + 1] - offset_of_p_[i]),
            v.height + level_fix_db_[i] + t * (level_fix_db_[i + 1] - level_fix_db_[i])};
}

}  // namespace wane

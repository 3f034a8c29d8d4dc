#include "tracking/pitch.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <vector>

#include "core/harmonics.hpp"
#include "core/units.hpp"

namespace wane {

namespace {

/// Stiff-string partial n (core/harmonics.hpp), argument order of this file.
double series_freq(int n, double f0_hz, double b) { return stiff_partial_hz(f0_hz, b, n); }

struct sieve_result {
    double explained = 0.0;
    double coverage = 0.0;
    double refined_f0_hz = 0.0;
};

sieve_result sieve(std::span<const pitch_peak> peaks, std::span<const double> amp, double total_amp,
                   double max_peak_hz, double f0_hz, double b, const pitch_params& params) {
    std::vector<bool> hit(static_cast<std::size_t>(params.max_harmonic + 1), false);
    double matched_amp = 0.0;
    double num = 0.0;
    double den = 0.0;
    int n_top = 0;
    for (std::size_t i = 0; i < peaks.size(); ++i) {
        const int n = harmonic_number(peaks[i].freq_hz, f0_hz, b, params.tolerance_rel);
        if (n < 1 || n > params.max_harmonic) continue;
        hit[n] = true;
        n_top = std::max(n_top, n);
        matched_amp += amp[i];
        // Least squares of f_i = n s_n f0: f0 = sum w f n s / sum w (n s)^2.
        const double ns = series_freq(n, 1.0, b);
        num += amp[i] * peaks[i].freq_hz * ns;
        den += amp[i] * ns * ns;
    }
    if (n_top == 0) return {};
    // Coverage over the harmonics up to the highest strong peak (a candidate that leaves peaks
    // unexplained up there loses coverage too), and over the low harmonics only: the upper ones
    // of real sounds are often weak or missing.
    int n_range = 0;
    while (n_range < params.max_harmonic && series_freq(n_range + 1, f0_hz, b) <= max_peak_hz * (1.0 + params.tolerance_rel))
        ++n_range;
    const int n_cov = std::max(1, std::min(std::max(n_top, n_range), params.coverage_harmonics));
    const auto present = std::count(hit.begin() + 1, hit.begin() + n_cov + 1, true);
    return {matched_amp / total_amp, double(present) / n_cov, num / den};
}

}  // namespace

int harmonic_number(double freq_hz, double f0_hz, double inharmonicity_b, double tolerance_rel) {
    if (f0_hz <= 0.0) return 0;
    // Start from the harmonic ratio and step to the nearest member of the stiff series.
    int n = std::max(1, static_cast<int>(std::lround(freq_hz / f0_hz)));
    for (int iter = 0; iter < 8; ++iter) {
        const double here = std::abs(freq_hz - series_freq(n, f0_hz, inharmonicity_b));
        if (n > 1 && std::abs(freq_hz - series_freq(n - 1, f0_hz, inharmonicity_b)) < here) --n;
        else if (std::abs(freq_hz - series_freq(n + 1, f0_hz, inharmonicity_b)) < here) ++n;
        else break;
    }
    const double predicted = series_freq(n, f0_hz, inharmonicity_b);
    // Tolerance relative to the partial, but never wider than a quarter of the spacing.
    const double tol = std::min(tolerance_rel, 0.25 / n);
    return std::abs(freq_hz / predicted - 1.0) <= tol ? n : 0;
}

pitch_estimate estimate_pitch(std::span<const pitch_peak> all_peaks, const pitch_params& params) {
    if (all_peaks.empty()) return {};
    std::vector<pitch_peak> peaks(all_peaks.begin(), all_peaks.end());
    std::sort(peaks.begin(), peaks.end(), [](auto& a, auto& b) { return a.level_db > b.level_db; });
    const double max_db = peaks.front().level_db;
    std::erase_if(peaks, [&](auto& p) { return p.level_db < max_db - params.strong_below_max_db; });
    if (peaks.size() > static_cast<std::size_t>(params.max_peaks)) peaks.resize(params.max_peaks);
    std::vector<double> amp(peaks.size());
    double total = 0.0;
    for (std::size_t i = 0; i < peaks.size(); ++i) total += amp[i] = to_amp(level_db{peaks[i].level_db}).lin;

    double max_peak_hz = 0.0;
    for (const auto& p : peaks) max_peak_hz = std::max(max_peak_hz, p.freq_hz);
    constexpr std::array<double, 5> b_grid_fraction{0.0, 1.0 / 30.0, 0.1, 1.0 / 3.0, 1.0};
    pitch_estimate best;
    double best_score = -1.0;
    const std::size_t seeds = std::min<std::size_t>(peaks.size(), 8);
    for (std::size_t s = 0; s < seeds; ++s) {
        for (int k = 1; k <= params.max_divisor; ++k) {
            for (double bf : b_grid_fraction) {
                const double b = bf * params.max_inharmonicity;
                // The seed is harmonic k of the candidate.
                const double f0 = peaks[s].freq_hz / series_freq(k, 1.0, b);
                if (f0 < params.min_f0_hz || f0 > params.max_f0_hz) continue;
                auto r = sieve(peaks, amp, total, max_peak_hz, f0, b, params);
                if (r.refined_f0_hz <= 0.0) continue;
                r = sieve(peaks, amp, total, max_peak_hz, r.refined_f0_hz, b, params);  // at the LS f0
                if (r.refined_f0_hz <= 0.0) continue;
                // Only series that explain most of the amplitude and cover enough of their low
                // harmonics count as a pitch.
                if (r.explained < params.min_explained || r.coverage < params.min_coverage) continue;
                const double score = r.explained * std::sqrt(r.coverage);
                // Ties (within 1e-9) go to the higher f0 and then to the smaller B.
                if (score > best_score + 1e-9 ||
                    (std::abs(score - best_score) <= 1e-9 && r.refined_f0_hz > best.f0_hz * 1.5)) {
                    best_score = score;
                    best = {.f0_hz = r.refined_f0_hz, .inharmonicity_b = b, .explained = r.explained,
                            .coverage = r.coverage, .harmonic = true};
                }
            }
        }
    }
    return best;  // f0 = 0, harmonic = false when no candidate qualified
}

inharmonicity_fit fit_inharmonicity(std::span<const int> harmonic, std::span<const double> freq_hz,
                                    std::span<const double> weight) {
    // Weighted LS of y = a + c x with y = (f/n)^2, x = n^2: a = f0^2, c = f0^2 B.
    double sw = 0.0, sx = 0.0, sy = 0.0, sxx = 0.0, sxy = 0.0;
    int used = 0;
    int n_min = 1 << 30, n_max = 0;
    for (std::size_t i = 0; i < harmonic.size(); ++i) {
        if (harmonic[i] < 1 || weight[i] <= 0.0) continue;
        const double n = harmonic[i];
        const double x = n * n;
        const double y = (freq_hz[i] / n) * (freq_hz[i] / n);
        sw += weight[i];
        sx += weight[i] * x;
        sy += weight[i] * y;
        sxx += weight[i] * x * x;
        sxy += weight[i] * x * y;
        ++used;
        n_min = std::min(n_min, harmonic[i]);
        n_max = std::max(n_max, harmonic[i]);
    }
    if (used == 0) return {};
    const double det = sw * sxx - sx * sx;
    if (n_max > n_min && det > 0.0) {
        const double a = (sxx * sy - sx * sxy) / det;
        const double c = (sw * sxy - sx * sy) / det;
        if (a > 0.0 && c >= 0.0) return {std::sqrt(a), c / a, used};
    }
    // B = 0: f0^2 = weighted mean of (f/n)^2.
    return {std::sqrt(sy / sw), 0.0, used};
}

double fit_f0_given_b(std::span<const int> harmonic, std::span<const double> freq_hz,
                      std::span<const double> weight, double inharmonicity_b, int max_harmonic) {
    double num = 0.0, den = 0.0;
    for (std::size_t i = 0; i < harmonic.size(); ++i) {
        if (harmonic[i] < 1 || harmonic[i] > max_harmonic || weight[i] <= 0.0) continue;
        const double ns = series_freq(harmonic[i], 1.0, inharmonicity_b);
        num += weight[i] * freq_hz[i] * ns;
        den += weight[i] * ns * ns;
    }
    return den > 0.0 ? num / den : 0.0;
}

inharmonicity_fit fit_harmonic_series(std::span<const int> harmonic, std::span<const double> freq_hz,
                                      std::span<const double> weight, int low_harmonics) {
    // One partial per label: the one of largest weight.
    std::vector<int> n;
    std::vector<double> f, w;
    for (std::size_t i = 0; i < harmonic.size(); ++i) {
        if (harmonic[i] < 1 || weight[i] <= 0.0) continue;
        const auto it = std::find(n.begin(), n.end(), harmonic[i]);
        if (it == n.end()) {
            n.push_back(harmonic[i]);
            f.push_back(freq_hz[i]);
            w.push_back(weight[i]);
        } else if (const auto j = static_cast<std::size_t>(it - n.begin()); weight[i] > w[j]) {
            f[j] = freq_hz[i];
            w[j] = weight[i];
        }
    }
    if (n.empty()) return {};
    const std::vector<double> equal(n.size(), 1.0);
    inharmonicity_fit fit = fit_inharmonicity(n, f, equal);
    const double low_f0 = fit_f0_given_b(n, f, w, fit.inharmonicity_b, low_harmonics);
    if (low_f0 > 0.0) fit.f0_hz = low_f0;
    return fit;
}

}  // namespace wane

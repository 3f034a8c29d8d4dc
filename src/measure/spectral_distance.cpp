#include "measure/spectral_distance.hpp"

#include <kiss_fftr.h>

#include <algorithm>
#include <cassert>
#include <cmath>
#include <map>
#include <memory>
#include <stdexcept>
#include <string>

#include "core/units.hpp"

namespace wane {

namespace {

/// x^2 in double (samples are stored as float, sums accumulate in double).
inline double squared(float v) { return static_cast<double>(v) * static_cast<double>(v); }

/// A KissFFT real forward plan with its window and buffers; made once per size per thread.
struct stft_plan {
    int size = 0;
    kiss_fftr_cfg cfg = nullptr;
    std::vector<float> window;      ///< periodic Hann: w[n] = 0.5 - 0.5 cos(2 pi n / N)
    std::vector<float> frame;       ///< windowed input, N samples
    std::vector<kiss_fft_cpx> bins; ///< N/2 + 1 bins

    explicit stft_plan(int n) : size(n), cfg(kiss_fftr_alloc(n, 0, nullptr, nullptr)),
                                window(static_cast<std::size_t>(n)), frame(static_cast<std::size_t>(n)),
                                bins(static_cast<std::size_t>(n / 2 + 1)) {
        if (cfg == nullptr) throw std::runtime_error("KissFFT could not plan a real FFT of size " + std::to_string(n));
        for (int i = 0; i < n; ++i) {
            window[static_cast<std::size_t>(i)] =
                static_cast<float>(0.5 - 0.5 * std::cos(two_pi * static_cast<double>(i) / static_cast<double>(n)));
        }
    }
    ~stft_plan() { kiss_fftr_free(cfg); }
    stft_plan(const stft_plan&) = delete;
    stft_plan& operator=(const stft_plan&) = delete;

    /// Power |X[k]|^2 of the windowed frame centred at `centre` (samples outside x are zero).
    void power_spectrum(std::span<const float> x, std::ptrdiff_t centre, std::vector<double>& power) {
        const std::ptrdiff_t begin = centre - size / 2;
        for (int i = 0; i < size; ++i) {
            const std::ptrdiff_t j = begin + i;
            const float v = (j >= 0 && j < static_cast<std::ptrdiff_t>(x.size())) ? x[static_cast<std::size_t>(j)] : 0.0f;
            frame[static_cast<std::size_t>(i)] = v * window[static_cast<std::size_t>(i)];
        }
        kiss_fftr(cfg, frame.data(), bins.data());
        for (std::size_t k = 0; k < bins.size(); ++k) {
            power[k] = squared(bins[k].r) + squared(bins[k].i);
        }
    }
};

stft_plan& plan_for(int size) {
    thread_local std::map<int, std::unique_ptr<stft_plan>> plans;
    auto& slot = plans[size];
    if (!slot) slot = std::make_unique<stft_plan>(size);
    return *slot;
}

constexpr int min_fft_size = 16;

}  // namespace

spectral_distance_result spectral_distance(std::span<const float> reference, std::span<const float> other,
                                           const spectral_distance_params& params) {
    const std::size_t end = params.end_frames == 0 ? reference.size() : params.end_frames;
    if (end <= params.start_frames) throw std::invalid_argument("spectral distance: empty time range");
    if (params.fft_sizes.empty()) throw std::invalid_argument("spectral distance: no FFT sizes");
    assert(params.hop_divisor >= 1);
    spectral_distance_result result;
    for (const int size : params.fft_sizes) {
        if (size < min_fft_size || size % 2 != 0) {
            throw std::invalid_argument("spectral distance: FFT size " + std::to_string(size) +
                                        " must be even and at least " + std::to_string(min_fft_size));
        }
        stft_plan& plan = plan_for(size);
        const std::size_t hop = static_cast<std::size_t>(std::max(1, size / params.hop_divisor));
        const std::size_t all_bins = static_cast<std::size_t>(size) / 2 + 1;
        std::vector<double> pa(all_bins), pb(all_bins);
        // Bins k = 0 .. n_bins - 1 lie at or below band_limit_fraction of Nyquist (bin N/2).
        assert(params.band_limit_fraction > 0.0 && params.band_limit_fraction <= 1.0);
        const std::size_t n_bins = std::min(
            all_bins, static_cast<std::size_t>(std::floor(params.band_limit_fraction * (0.5 * size))) + 1);

        // Pass 1: the reference's peak bin power over the range.
        double peak_power = 0.0;
        for (std::size_t c = params.start_frames; c < end; c += hop) {
            plan.power_spectrum(reference, static_cast<std::ptrdiff_t>(c), pa);
            peak_power = std::max(peak_power, *std::max_element(pa.begin(), pa.begin() + static_cast<std::ptrdiff_t>(n_bins)));
        }
        const double used_threshold = peak_power * db_to_power(-params.range_db);
        const double floor_power = peak_power * db_to_power(-params.floor_db);

        // Pass 2: accumulate the squared dB differences and the magnitude errors.
        resolution_distance r{.fft_size = size, .hop_frames = static_cast<int>(hop)};
        double sum_sq_db = 0.0, sum_sq_mag_err = 0.0, sum_sq_mag_ref = 0.0;
        for (std::size_t c = params.start_frames; c < end; c += hop) {
            plan.power_spectrum(reference, static_cast<std::ptrdiff_t>(c), pa);
            plan.power_spectrum(other, static_cast<std::ptrdiff_t>(c), pb);
            ++r.stft_frames;
            for (std::size_t k = 0; k < n_bins; ++k) {
                const double mag_a = std::sqrt(pa[k]);
                const double mag_b = std::sqrt(pb[k]);
                sum_sq_mag_err += (mag_a - mag_b) * (mag_a - mag_b);
                sum_sq_mag_ref += pa[k];
                if (peak_power > 0.0 && pa[k] >= used_threshold) {
                    const double d_db = power_to_db(std::max(pa[k], floor_power)) - power_to_db(std::max(pb[k], floor_power));
                    sum_sq_db += d_db * d_db;
                    ++r.bins_used;
                }
            }
        }
        r.log_spectral_distance_db = r.bins_used > 0 ? std::sqrt(sum_sq_db / static_cast<double>(r.bins_used)) : 0.0;
        r.spectral_convergence = sum_sq_mag_ref > 0.0 ? std::sqrt(sum_sq_mag_err / sum_sq_mag_ref)
                                                      : (sum_sq_mag_err > 0.0 ? infinity : 0.0);
        result.per_resolution.push_back(r);
    }
    for (const resolution_distance& r : result.per_resolution) {
        result.log_spectral_distance_db += r.log_spectral_distance_db;
        result.spectral_convergence += r.spectral_convergence;
    }
    const double count = static_cast<double>(result.per_resolution.size());
    result.log_spectral_distance_db /= count;
    result.spectral_convergence /= count;
    return result;
}

}  // namespace wane

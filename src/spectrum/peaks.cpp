#include "spectrum/peaks.hpp"

#include <algorithm>
#include <array>
#include <bit>
#include <cassert>
#include <cmath>
#include <cstdint>
#include <cstring>

#include "core/order_select.hpp"
#include "core/units.hpp"
#include "synthesis/kernel_clones.hpp"

#if defined(__x86_64__)
#include <immintrin.h>
#endif

namespace wane {

namespace {
double db_of_power(double power) { return 10.0 * std::log10(std::max(power, 1e-30)); }
/// std::remainder(phase, two_pi) for |phase| < 1.5 two_pi, without the library call: the nearest
/// multiple n two_pi has n in {-1, 0, 1} (n = 0 at |phase| = two_pi / 2, the tie rounding to even),
/// and phase -+ two_pi is exact there (Sterbenz: |phase| within [two_pi / 2, 2 two_pi]), so the
/// same value as the remainder. peak_phase_rad's phases are atan2's, in [-two_pi / 2, two_pi / 2]:
/// their difference stays within two_pi, and ph0 + |offset| x that wrapped difference under
/// 1.5 two_pi for |offset_bins| < 2 (QIFFT offsets are within 0.5). (Callgrind, `wane analyze` of
/// the synthetic note: peak_phase_rad 3.95 -> 2.84 M instructions.)
double wrap_phase(double phase) {
    assert(std::abs(phase) < 1.5 * two_pi);
    constexpr double half_turn = 0.5 * two_pi;  // exact: a power-of-two scaling
    if (phase > half_turn) return phase - two_pi;
    if (phase < -half_turn) return phase + two_pi;
    return phase;
}
constexpr std::size_t bin_stride = 2;  ///< the floor looks at every 2nd bin (zero padding >= 2)

/// Bins find_peaks tests at a time against the threshold before looking at each (a vector loop;
/// a multiple of 4).
constexpr std::size_t scan_lanes = 16;
static_assert(scan_lanes % 4 == 0);

/// Four floats side by side (GCC's vector extension: SSE on the baseline), and their compare.
using float4 = float __attribute__((vector_size(16)));
using int4 = std::int32_t __attribute__((vector_size(16)));

/// max x[n] over a non-empty x of non-negative powers, in scan_lanes lanes of float4 vectors (the
/// maximum is the same in any order: the same value as std::max_element's).
float largest_power(std::span<const float> x) {
    constexpr std::size_t vectors = scan_lanes / 4;
    std::array<float4, vectors> top{};
    std::size_t n = 0;
    for (; n + scan_lanes <= x.size(); n += scan_lanes) {
        for (std::size_t k = 0; k < vectors; ++k) {
            float4 v;
            std::memcpy(&v, x.data() + n + 4 * k, sizeof v);
            top[k] = v > top[k] ? v : top[k];
        }
    }
    float best = 0.0f;
    for (const float4& t : top)
        for (int l = 0; l < 4; ++l) best = std::max(best, t[l]);
    for (; n < x.size(); ++n) best = std::max(best, x[n]);
    return best;
}

/// Which of the scan_lanes values from x are over thr: bit i set for x[i] > thr (vector compares;
/// each lane's compare is all ones or all zeros, so one bit of it says which).
std::uint32_t lanes_over(const float* x, float thr) {
    std::uint32_t mask = 0;
    for (std::size_t k = 0; k < scan_lanes; k += 4) {
        float4 v;
        std::memcpy(&v, x + k, sizeof v);
        const int4 over = v > thr;
#if defined(__SSE__)
        // The lanes' sign bits in one instruction (movmskps on the compare's bits).
        mask |= static_cast<std::uint32_t>(__builtin_ia32_movmskps(std::bit_cast<float4>(over))) << k;
#else
        for (std::size_t l = 0; l < 4; ++l) mask |= (static_cast<std::uint32_t>(over[l]) & 1u) << (k + l);
#endif
    }
    return mask;
}

/// lanes[i * rank_lanes + l] = bins[l * band + i * bin_stride], i < count, l < rank_lanes: rank_lanes
/// bands' every bin_stride-th bin side by side (select_small_ranks' layout), a row of lanes at a
/// time (contiguous stores). Copies only: the same values on every path (callgrind, `wane analyze`
/// of the synthetic note: noise_floor::measure 11.13 -> 10.13 M instructions compiled for AVX2).
void gather_band_lanes_baseline(const float* bins, std::size_t band, std::size_t count, float* lanes) {
    for (std::size_t i = 0; i < count; ++i)
        for (std::size_t l = 0; l < rank_lanes; ++l) lanes[i * rank_lanes + l] = bins[l * band + i * bin_stride];
}

#if defined(__x86_64__)
/// gather_band_lanes_baseline with a row of lanes per vgatherdps (lane l at l * band).
[[gnu::target("avx2")]] void gather_band_lanes_avx2(const float* bins, std::size_t band, std::size_t count, float* lanes) {
    static_assert(rank_lanes == 8);
    assert(band * rank_lanes < (std::size_t{1} << 31));
    const auto b = static_cast<int>(band);
    const __m256i at = _mm256_setr_epi32(0, b, 2 * b, 3 * b, 4 * b, 5 * b, 6 * b, 7 * b);
    for (std::size_t i = 0; i < count; ++i)
        _mm256_storeu_ps(lanes + i * rank_lanes, _mm256_i32gather_ps(bins + i * bin_stride, at, sizeof(float)));
}
#endif

void gather_band_lanes(const float* bins, std::size_t band, std::size_t count, float* lanes) {
#if defined(__x86_64__)
    if (cpu_has_avx2()) return gather_band_lanes_avx2(bins, band, count, lanes);
#endif
    gather_band_lanes_baseline(bins, band, count, lanes);
}

/// The QIFFT peak at local maximum k (power[k - 1] < power[k] >= power[k + 1]); its phase from the
/// bins when given.
spectral_peak peak_at(std::span<const float> power, std::span<const kiss_fft_cpx> bins, const qifft_correction& correction,
                      std::size_t k, double bin_hz, double band_floor_db) {
    const auto fit = correction.interpolate(db_of_power(power[k - 1]), db_of_power(power[k]), db_of_power(power[k + 1]));
    spectral_peak peak{.freq_hz = (double(k) + fit.offset_bins) * bin_hz,
                       .level_db = fit.level_db,
                       .phase_rad = 0.0,
                       .floor_db = band_floor_db,
                       .bin = k,
                       .offset_bins = fit.offset_bins};
    if (!bins.empty()) peak.phase_rad = peak_phase_rad(bins, k, fit.offset_bins);
    return peak;
}
}  // namespace

double peak_phase_rad(std::span<const kiss_fft_cpx> bins, std::size_t bin, double offset_bins) {
    // Zero-phase frame: the phase is nearly flat over the main lobe; interpolate linearly toward
    // the neighbour on the side of the true peak.
    const std::size_t k2 = offset_bins >= 0.0 ? bin + 1 : bin - 1;
    const double ph0 = std::atan2(double(bins[bin].i), double(bins[bin].r));
    const double ph1 = std::atan2(double(bins[k2].i), double(bins[k2].r));
    return wrap_phase(ph0 + std::abs(offset_bins) * wrap_phase(ph1 - ph0));
}

noise_floor::noise_floor(int bin_count, double bin_hz, double hop_s, const noise_floor_params& params)
    : bin_count_(bin_count),
      bin_hz_(bin_hz),
      band_bins_(std::max(params.min_band_bins, static_cast<int>(std::lround(params.band_hz / bin_hz)))),
      update_interval_(std::max(1, static_cast<int>(params.max_update_s / hop_s))),
      alpha_(1.0 - std::exp(-hop_s * update_interval_ / params.smoothing_s)),
      quantile_(params.quantile),
      mean_over_quantile_(1.0 / -std::log(1.0 - params.quantile)) {
    const int bands = (bin_count + band_bins_ - 1) / band_bins_;
    bands_db_.assign(static_cast<std::size_t>(bands), -300.0);
    bands_power_.assign(bands_db_.size(), 0.0);
    measured_db_.assign(bands_db_.size(), -300.0);
    scratch_.resize(static_cast<std::size_t>(band_bins_));
    select_scratch_.resize(scratch_.size());
    lanes_.resize(scratch_.size() * rank_lanes);
}

void noise_floor::measure(std::span<const float> power) {
    assert(static_cast<int>(power.size()) == bin_count_);
    // Whole bands rank_lanes at a time when their rank is small (select_small_ranks: the values
    // select_order gives each band alone, below).
    const auto band = static_cast<std::size_t>(band_bins_);
    const std::size_t whole_count = (band + bin_stride - 1) / bin_stride;
    const auto whole_q = static_cast<std::size_t>(quantile_ * double(whole_count - 1));
    std::size_t first = 0;
    if (whole_q <= max_small_rank && whole_q < whole_count) {
        std::array<float, rank_lanes> value{};
        for (; first + rank_lanes <= bands_db_.size() && (first + rank_lanes) * band <= power.size(); first += rank_lanes) {
            gather_band_lanes(power.data() + first * band, band, whole_count, lanes_.data());
            select_small_ranks(lanes_, whole_count, whole_q, value);
            for (std::size_t l = 0; l < rank_lanes; ++l) measured_db_[first + l] = db_of_power(double(value[l]) * mean_over_quantile_);
        }
        // The whole bands left over (fewer than rank_lanes) in one more pass, the unused lanes
        // repeating the last of them: each lane's value is its own set's, so the same values as
        // select_order's one band at a time (callgrind, `wane analyze` of the synthetic note:
        // noise_floor::update 11.95 -> 11.67 M instructions).
        const std::size_t whole_bands = std::min(bands_db_.size(), power.size() / band);
        if (const std::size_t left = whole_bands > first ? whole_bands - first : 0; left > 0) {
            for (std::size_t i = 0; i < whole_count; ++i)
                for (std::size_t l = 0; l < rank_lanes; ++l)
                    lanes_[i * rank_lanes + l] = power[(first + std::min(l, left - 1)) * band + i * bin_stride];
            select_small_ranks(lanes_, whole_count, whole_q, value);
            for (std::size_t l = 0; l < left; ++l) measured_db_[first + l] = db_of_power(double(value[l]) * mean_over_quantile_);
            first += left;
        }
    }
    for (std::size_t b = first; b < bands_db_.size(); ++b) {
        const std::size_t lo = b * band_bins_;
        const std::size_t hi = std::min(power.size(), lo + band_bins_);
        // Every bin_stride-th bin: with zero padding neighbours are correlated, so this loses little.
        std::size_t count = 0;
        for (std::size_t k = lo; k < hi; k += bin_stride) scratch_[count++] = power[k];
        const auto q = static_cast<std::size_t>(quantile_ * double(count - 1));
        const float value = select_order(std::span(scratch_).first(count), q, false, {}, select_scratch_).kth;
        measured_db_[b] = db_of_power(double(value) * mean_over_quantile_);
    }
}

void noise_floor::reset(std::span<const float> power) {
    measure(power);
    bands_db_ = measured_db_;
    started_ = true;
    refresh_power();
}

void noise_floor::refresh_power() {
    constexpr double ln10_over_10 = 0.23025850929940457;  // 10^(dB / 10) = exp(dB ln(10) / 10)
    for (std::size_t b = 0; b < bands_db_.size(); ++b) bands_power_[b] = std::exp(bands_db_[b] * ln10_over_10);
}

void noise_floor::update(std::span<const float> power) {
    if (!started_) return reset(power);
    // Re-measured every update_interval-th frame; the running average moves slowly anyway.
    if (++frames_since_ < update_interval_) return;
    frames_since_ = 0;
    measure(power);
    for (std::size_t b = 0; b < bands_db_.size(); ++b)
        bands_db_[b] += alpha_ * (measured_db_[b] - bands_db_[b]);
    refresh_power();
}

std::size_t noise_floor::band_of(double freq_hz) const {
    return static_cast<std::size_t>(std::clamp(freq_hz / bin_hz_ / band_bins_, 0.0, double(bands_db_.size() - 1)));
}

double noise_floor::floor_db_at(double freq_hz) const { return bands_db_[band_of(freq_hz)]; }

void find_peaks(std::span<const float> power, std::span<const kiss_fft_cpx> bins,
                const qifft_correction& correction, int fft_size, double sample_rate_hz,
                const noise_floor* floor, const peak_params& params, std::vector<spectral_peak>& out) {
    out.clear();
    const double bin_hz = sample_rate_hz / fft_size;
    const double max_freq_hz = params.max_freq_hz > 0.0 ? params.max_freq_hz : 0.475 * sample_rate_hz;
    const auto last = static_cast<std::size_t>(
        std::min(double(power.size() - 2), std::floor(max_freq_hz / bin_hz)));
    const auto first = static_cast<std::size_t>(std::max(1.0, std::ceil(params.min_freq_hz / bin_hz)));
    if (first > last) return;
    const float frame_max = largest_power(power.subspan(first, last + 1 - first));
    const double base_thr = std::max(double(frame_max) * db_to_power(-params.below_max_db),
                                     db_to_power(params.abs_floor_db));
    const double above_floor = db_to_power(params.above_floor_db);
    // Power threshold per floor band (the floor's bands are whole multiples of FFT bins).
    const double band_hz = floor != nullptr ? floor->band_hz() : sample_rate_hz;
    const auto band_bins = std::max<std::size_t>(1, static_cast<std::size_t>(std::lround(band_hz / bin_hz)));
    for (std::size_t band_lo = (first / band_bins) * band_bins; band_lo <= last; band_lo += band_bins) {
        const std::size_t lo = std::max(band_lo, first);
        const std::size_t hi = std::min(band_lo + band_bins, last + 1);
        const std::size_t band = floor != nullptr ? floor->band_of((double(band_lo) + 0.5 * double(band_bins)) * bin_hz) : 0;
        const double band_floor_db = floor != nullptr ? floor->bands_db()[band] : -300.0;
        const auto thr = static_cast<float>(
            floor != nullptr ? std::max(base_thr, floor->band_power(band) * above_floor) : base_thr);
        for (std::size_t chunk = lo; chunk < hi; chunk += scan_lanes) {
            // Most bins lie under the threshold: scan_lanes of them are compared at once, and only
            // those over it are looked at, in order (callgrind, `wane analyze` of the synthetic
            // note: find_peaks 14.91 -> 14.23 M instructions; the same peaks).
            const std::size_t end = std::min(chunk + scan_lanes, hi);
            if (end - chunk == scan_lanes) {
                for (std::uint32_t over = lanes_over(&power[chunk], thr); over != 0; over &= over - 1) {
                    const std::size_t k = chunk + static_cast<std::size_t>(std::countr_zero(over));
                    const float p = power[k];
                    if (p > power[k - 1] && p >= power[k + 1])
                        out.push_back(peak_at(power, bins, correction, k, bin_hz, band_floor_db));
                }
                continue;
            }
            for (std::size_t k = chunk; k < end; ++k) {
                const float p = power[k];
                if (p <= thr || !(p > power[k - 1] && p >= power[k + 1])) continue;
                out.push_back(peak_at(power, bins, correction, k, bin_hz, band_floor_db));
            }
        }
    }
}

}  // namespace wane

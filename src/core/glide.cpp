// A partial's early pitch glide (see glide.hpp for the formula and its error budget).
#include "core/glide.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <cstddef>
#include <numbers>

#include "core/units.hpp"
#include "synthesis/kernel_clones.hpp"

namespace wane {

namespace {

/// x0 per cent: ln(2) / 1200 (a cent is 2^(1/1200) in frequency).
constexpr double nepers_per_cent = std::numbers::ln2 / 1200.0;
/// Terms of Ein's series (glide.hpp: the rest is under 1e-18 relative for |x| <= ln 2).
constexpr std::size_t ein_series_terms = 16;

/// The series' coefficients 1 / (k k!), k = 1 .. 16.
constexpr std::array<double, ein_series_terms> ein_coefficients = [] {
    std::array<double, ein_series_terms> c{};
    double factorial = 1.0;
    for (std::size_t k = 1; k <= ein_series_terms; ++k) {
        factorial *= static_cast<double>(k);
        c[k - 1] = 1.0 / (static_cast<double>(k) * factorial);
    }
    return c;
}();

/// For |x| <= 1/16 (offsets up to 108 cents) 8 terms do: the first left out, |x|^9 / (9 * 9!),
/// is under 1e-16 |x|.
constexpr double short_series_max_x = 1.0 / 16.0;
constexpr std::size_t short_series_terms = 8;

/// expm1's series to x^9 / 9! for |x| <= short_series_max_x (glide_terms_at_decays).
constexpr std::size_t expm1_series_terms = 9;
/// For |x| <= 1/8 (offsets up to 216 cents: the glide search's first ring past 96) to x^11 / 11!:
/// the first term left out, |x|^12 / 12!, is under 3e-19 |x|.
constexpr double mid_series_max_x = 1.0 / 8.0;
constexpr std::size_t mid_expm1_series_terms = 11;

/// Its coefficients 1 / k!, k = 1 .. 11.
constexpr std::array<double, mid_expm1_series_terms> expm1_coefficients = [] {
    std::array<double, mid_expm1_series_terms> c{};
    double factorial = 1.0;
    for (std::size_t k = 1; k <= mid_expm1_series_terms; ++k) {
        factorial *= static_cast<double>(k);
        c[k - 1] = 1.0 / factorial;
    }
    return c;
}();

/// Ein(x) = sum_{k=1..16} x^k / (k k!), for |x| <= ln 2 (asserted), by Horner's rule (8 terms
/// where they suffice).
double ein(double x) {
    assert(std::abs(x) <= std::numbers::ln2 * (1.0 + 1e-12));
    const std::size_t terms = std::abs(x) <= short_series_max_x ? short_series_terms : ein_series_terms;
    double sum = 0.0;
    for (std::size_t k = terms; k-- > 0;) sum = (sum + ein_coefficients[k]) * x;
    return sum;
}

}  // namespace

double glide_cents_at(double glide_cents, double glide_s, double time_s) {
    if (glide_cents == 0.0) return 0.0;
    return glide_cents * std::exp(-time_s / glide_s);
}

double glide_remaining_phase_at_decay_rad(double freq_hz, double glide_cents, double glide_s, double decay) {
    if (glide_cents == 0.0) return 0.0;
    return two_pi * freq_hz * glide_s * ein(nepers_per_cent * glide_cents * decay);
}

double glide_freq_excess_at_decay(double glide_cents, double decay) {
    return std::expm1(nepers_per_cent * glide_cents * decay);
}

namespace {

/// glide_terms_at_decays's series (x = x0 decay[b]): Ein's first 8 terms, or (MidRange) its 8
/// where |x| <= short_series_max_x and its 16 elsewhere, as ein takes them (both summed, one kept:
/// the loop stays branch-free); expm1's first Expm1Terms terms. Horner's rule, as ein.
template <bool MidRange, std::size_t Expm1Terms>
[[gnu::always_inline]] inline void terms_by_series(double x0, double rad_per_hz, const double* __restrict decay, std::size_t count,
                                                   double* __restrict remaining_rad_per_hz, double* __restrict excess) {
    for (std::size_t b = 0; b < count; ++b) {
        assert(std::abs(decay[b]) <= 1.0);
        const double x = x0 * decay[b];  // the product ein's caller forms, nepers_per_cent * cents * decay
        double ein_sum = 0.0;
        for (std::size_t k = short_series_terms; k-- > 0;) ein_sum = (ein_sum + ein_coefficients[k]) * x;
        if constexpr (MidRange) {
            double long_sum = 0.0;
            for (std::size_t k = ein_series_terms; k-- > 0;) long_sum = (long_sum + ein_coefficients[k]) * x;
            ein_sum = std::abs(x) <= short_series_max_x ? ein_sum : long_sum;
        }
        double expm1_sum = 0.0;
        for (std::size_t k = Expm1Terms; k-- > 0;) expm1_sum = (expm1_sum + expm1_coefficients[k]) * x;
        remaining_rad_per_hz[b] = rad_per_hz * ein_sum;
        excess[b] = expm1_sum;
    }
}

/// terms_by_series for offsets up to short_series_max_x and up to mid_series_max_x: element-wise
/// loops, compiled for AVX2 and for the baseline (synthesis/kernel_clones.hpp: no FMA, the same bits).
WANE_KERNEL_CLONES
void short_terms_by_series(double x0, double rad_per_hz, const double* decay, std::size_t count, double* remaining_rad_per_hz,
                           double* excess) {
    terms_by_series<false, expm1_series_terms>(x0, rad_per_hz, decay, count, remaining_rad_per_hz, excess);
}
WANE_KERNEL_CLONES
void mid_terms_by_series(double x0, double rad_per_hz, const double* decay, std::size_t count, double* remaining_rad_per_hz,
                         double* excess) {
    terms_by_series<true, mid_expm1_series_terms>(x0, rad_per_hz, decay, count, remaining_rad_per_hz, excess);
}

}  // namespace

void glide_terms_at_decays(double glide_cents, double glide_s, std::span<const double> decay,
                           std::span<double> remaining_rad_per_hz, std::span<double> excess) {
    assert(remaining_rad_per_hz.size() == decay.size() && excess.size() == decay.size());
    const double x0 = nepers_per_cent * glide_cents;
    if (glide_cents == 0.0 || std::abs(x0) > mid_series_max_x) {
        for (std::size_t b = 0; b < decay.size(); ++b) {
            remaining_rad_per_hz[b] = glide_remaining_phase_at_decay_rad(1.0, glide_cents, glide_s, decay[b]);
            excess[b] = glide_freq_excess_at_decay(glide_cents, decay[b]);
        }
        return;
    }
    const double rad_per_hz = two_pi * 1.0 * glide_s;  // glide_remaining_phase_at_decay_rad's factor at f = 1 Hz
    if (std::abs(x0) <= short_series_max_x) {
        short_terms_by_series(x0, rad_per_hz, decay.data(), decay.size(), remaining_rad_per_hz.data(), excess.data());
    } else {
        mid_terms_by_series(x0, rad_per_hz, decay.data(), decay.size(), remaining_rad_per_hz.data(), excess.data());
    }
}

namespace {

/// remaining_rad[b] = scale Ein(x0 decay[b]) by Ein's first Terms terms (Horner's rule, as ein).
template <std::size_t Terms>
void scaled_ein_series(double scale, double x0, std::span<const double> decay, std::span<double> remaining_rad) {
    for (std::size_t b = 0; b < decay.size(); ++b) {
        const double x = x0 * decay[b];
        double sum = 0.0;
        for (std::size_t k = Terms; k-- > 0;) sum = (sum + ein_coefficients[k]) * x;
        remaining_rad[b] = scale * sum;
    }
}

}  // namespace

void glide_remaining_phases_at_decays_rad(double freq_hz, double glide_cents, double glide_s,
                                          std::span<const double> decay, std::span<double> remaining_rad) {
    assert(remaining_rad.size() == decay.size());
    assert(std::all_of(decay.begin(), decay.end(), [](double d) { return d > 0.0 && d <= 1.0; }));
    const double x0 = nepers_per_cent * glide_cents;
    const double scale = two_pi * freq_hz * glide_s;  // glide_remaining_phase_at_decay_rad's factor
    if (std::abs(x0) <= short_series_max_x) {
        scaled_ein_series<short_series_terms>(scale, x0, decay, remaining_rad);
    } else {
        scaled_ein_series<ein_series_terms>(scale, x0, decay, remaining_rad);
    }
}

double glide_remaining_phase_rad(double freq_hz, double glide_cents, double glide_s, double time_s) {
    if (glide_cents == 0.0) return 0.0;
    return glide_remaining_phase_at_decay_rad(freq_hz, glide_cents, glide_s, std::exp(-time_s / glide_s));
}

double glide_total_phase_rad(double freq_hz, double glide_cents, double glide_s) {
    return glide_remaining_phase_rad(freq_hz, glide_cents, glide_s, 0.0);
}

double glide_phase_offset_rad(double freq_hz, double glide_cents, double glide_s, double time_s) {
    return glide_total_phase_rad(freq_hz, glide_cents, glide_s) -
           glide_remaining_phase_rad(freq_hz, glide_cents, glide_s, time_s);
}

double glide_settled_s(double freq_hz, double glide_cents, double glide_s) {
    if (glide_cents == 0.0) return 0.0;
    // 4 pi f tau |x0| e^(-t / tau) <= tolerance  <=>  t >= tau ln(4 pi f tau |x0| / tolerance).
    const double bound_at_zero = 2.0 * two_pi * freq_hz * glide_s * nepers_per_cent * std::abs(glide_cents);
    if (bound_at_zero <= glide_phase_tolerance_rad) return 0.0;
    return glide_s * std::log(bound_at_zero / glide_phase_tolerance_rad);
}

}  // namespace wane

// A partial's early pitch glide (see glide.hpp for the formula and its error budget).
#include "core/glide.hpp"

#include <cassert>
#include <cmath>
#include <numbers>

#include "core/units.hpp"

namespace wane {

namespace {

/// x0 per cent: ln(2) / 1200 (a cent is 2^(1/1200) in frequency).
constexpr double nepers_per_cent = std::numbers::ln2 / 1200.0;
/// Terms of Ein's series (glide.hpp: the rest is under 1e-18 relative for |x| <= ln 2).
constexpr int ein_series_terms = 16;

/// Ein(x) = sum_{k=1..16} x^k / (k k!), for |x| <= ln 2 (asserted): the terms x^k / k! by the
/// running product, each divided by k.
double ein(double x) {
    assert(std::abs(x) <= std::numbers::ln2 * (1.0 + 1e-12));
    double power_over_factorial = 1.0;
    double sum = 0.0;
    for (int k = 1; k <= ein_series_terms; ++k) {
        power_over_factorial *= x / static_cast<double>(k);
        sum += power_over_factorial / static_cast<double>(k);
    }
    return sum;
}

}  // namespace

double glide_cents_at(double glide_cents, double glide_s, double time_s) {
    if (glide_cents == 0.0) return 0.0;
    return glide_cents * std::exp(-time_s / glide_s);
}

double glide_remaining_phase_rad(double freq_hz, double glide_cents, double glide_s, double time_s) {
    if (glide_cents == 0.0) return 0.0;
    const double u = nepers_per_cent * glide_cents_at(glide_cents, glide_s, time_s);
    return two_pi * freq_hz * glide_s * ein(u);
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

// Units and the constants every stage shares. Levels in dB and linear amplitudes are distinct
// types so a dB value cannot be multiplied into a signal by mistake.
#pragma once

#include <cmath>
#include <limits>
#include <numbers>

namespace wane {

inline constexpr double pi = std::numbers::pi;
inline constexpr double two_pi = 2.0 * std::numbers::pi;
/// ln(1000): T60 = tau * ln1000 for an amplitude envelope exp(-t / tau) (60 dB = factor 1000).
inline constexpr double ln1000 = 6.907755278982137;
/// dB per neper of amplitude: 20 / ln(10).
inline constexpr double db_per_neper = 8.685889638065035;
inline constexpr double infinity = std::numeric_limits<double>::infinity();

/// A level in decibels relative to full scale (dBFS) or a gain in dB; 20 log10 of an amplitude.
struct level_db {
    double db = 0.0;
    friend constexpr bool operator==(level_db, level_db) = default;
    friend constexpr auto operator<=>(level_db, level_db) = default;
};

/// A linear amplitude factor (1.0 = full scale).
struct amp_lin {
    double lin = 0.0;
    friend constexpr bool operator==(amp_lin, amp_lin) = default;
    friend constexpr auto operator<=>(amp_lin, amp_lin) = default;
};

/// Nepers of amplitude per dB, ln(10) / 20, and of power, ln(10) / 10.
inline constexpr double amp_neper_per_db = std::numbers::ln10 / 20.0;
inline constexpr double power_neper_per_db = std::numbers::ln10 / 10.0;

/// amplitude = 10^(dB / 20) = e^(dB ln(10) / 20); -inf dB gives 0. By std::exp, not std::pow:
/// a third of pow's cost in glibc, within a few ulps of it (0.5 per nepers unit of the argument).
inline amp_lin to_amp(level_db l) { return amp_lin{std::exp(l.db * amp_neper_per_db)}; }
/// dB = 20 log10(amplitude); 0 gives -inf dB.
inline level_db to_level(amp_lin a) { return level_db{20.0 * std::log10(a.lin)}; }

/// Power ratio to dB: 10 log10(p).
inline double power_to_db(double power) { return 10.0 * std::log10(power); }
/// Power (mean square) ratio of a level in dB: 10^(db / 10) = e^(db ln(10) / 10) (as to_amp).
inline double db_to_power(double db) { return std::exp(db * power_neper_per_db); }

/// T60 in seconds to the slope of the level line in dB per second (-60 / T60).
/// T60 = inf holds the level (slope 0); a negative T60 rises at 60 / |T60| dB/s.
inline double t60_to_slope_db_per_s(double t60_s) { return std::isinf(t60_s) ? 0.0 : -60.0 / t60_s; }
/// Inverse of t60_to_slope_db_per_s; a zero slope gives T60 = inf.
inline double slope_db_per_s_to_t60(double slope_db_per_s) {
    return slope_db_per_s == 0.0 ? infinity : -60.0 / slope_db_per_s;
}

/// Cents between two frequencies: 1200 log2(f / ref).
inline double cents_between(double freq_hz, double ref_hz) { return 1200.0 * std::log2(freq_hz / ref_hz); }
/// The frequency ratio of an interval of c cents: 2^(c / 1200) (the inverse of cents_between).
inline double cents_to_ratio(double cents) { return std::exp2(cents / 1200.0); }

}  // namespace wane

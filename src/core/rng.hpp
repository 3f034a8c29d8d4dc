// The project's one random source (patch variation, noise rendering, dither seeding, demo notes,
// benchmarks and tests). std:: distributions are implementation-defined, so the same seed would
// give different numbers on different standard libraries; this one is fully specified here and
// gives the same numbers everywhere.
//
// splitmix64 (Steele, Lea & Flood 2014, "Fast splittable pseudorandom number generators",
// OOPSLA), with the finalizer constants of Vigna's public-domain splitmix64.c (from memory; the
// test checks the first output for state 0 against the value quoted from memory there). Counter-based use: the value for
// (seed, stream, index) is mix(seed + golden * (stream * stride + index + 1)), so every draw is
// independent of how many other draws were made (turning detune on does not change the level
// jitter of any partial).
#pragma once

#include <cmath>
#include <cstdint>
#include <numbers>

namespace wane {

/// splitmix64 finalizer: a bijective 64-bit mixing function.
constexpr std::uint64_t splitmix64_mix(std::uint64_t z) {
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
}

/// The splitmix64 increment (2^64 / golden ratio, odd).
inline constexpr std::uint64_t splitmix64_gamma = 0x9e3779b97f4a7c15ULL;

/// The top 53 bits of a 64-bit value as a double in [0, 1) (exact: k / 2^53).
constexpr double unit_interval(std::uint64_t bits) {
    constexpr double inv_2_53 = 1.0 / 9007199254740992.0;  // 2^-53
    return static_cast<double>(bits >> 11) * inv_2_53;
}

/// Sequential splitmix64 generator. The state only ever advances by splitmix64_gamma, so
/// skip(n) leaves it exactly where n calls of next() would.
struct splitmix64 {
    std::uint64_t state = 0;
    constexpr std::uint64_t next() {
        state += splitmix64_gamma;
        return splitmix64_mix(state);
    }
    /// Skips `draws` values in O(1).
    constexpr void skip(std::uint64_t draws) { state += draws * splitmix64_gamma; }
    /// Uniform in [0, 1) (k / 2^53).
    constexpr double unit() { return unit_interval(next()); }
    /// Uniform in (0, 1) ((k + 1/2) / 2^53): never 0, so log() of it is finite.
    constexpr double unit_open() {
        constexpr double inv_2_53 = 1.0 / 9007199254740992.0;  // 2^-53
        return (static_cast<double>(next() >> 11) + 0.5) * inv_2_53;
    }
    /// Uniform in [-1, 1) (2 k / 2^53 - 1, exact).
    constexpr double uniform_pm1() { return 2.0 * unit() - 1.0; }
    /// Uniform in [lo, hi).
    constexpr double uniform(double lo, double hi) { return lo + (hi - lo) * unit(); }
    /// Standard normal draw by the Box-Muller transform (Box & Muller 1958, Ann. Math. Statist.
    /// 29, 610): sqrt(-2 ln u1) cos(2 pi u2), u1 and u2 from unit_open() in that order. Uses two
    /// draws per value (the sine partner is not kept, so every value costs the same two draws).
    double gaussian() {
        const double u1 = unit_open();
        const double u2 = unit_open();
        return std::sqrt(-2.0 * std::log(u1)) * std::cos(2.0 * std::numbers::pi * u2);
    }
};

/// Deterministic value in [0, 1) for (seed, stream, index): one draw, no state.
constexpr double hashed_unit(std::uint64_t seed, std::uint64_t stream, std::uint64_t index) {
    constexpr std::uint64_t stream_stride = 0x100000000ULL;  // 2^32 indices per stream
    return unit_interval(splitmix64_mix(seed + splitmix64_gamma * (stream * stream_stride + index + 1)));
}

/// Deterministic value in [-1, 1) for (seed, stream, index).
constexpr double hashed_signed(std::uint64_t seed, std::uint64_t stream, std::uint64_t index) {
    return 2.0 * hashed_unit(seed, stream, index) - 1.0;
}

/// Combines a base seed with small integers (note, variant) into a new seed.
constexpr std::uint64_t derive_seed(std::uint64_t base, std::uint64_t a, std::uint64_t b = 0) {
    return splitmix64_mix(splitmix64_mix(base ^ splitmix64_mix(a + splitmix64_gamma)) + b * splitmix64_gamma);
}

}  // namespace wane

// The noise renderer's amplitude runs (synthesis/amplitude_runs.hpp): played four at a time, each
// run must give the very floats of its chain of products played alone, whatever the lengths; a
// frame's amplitude (fill_amplitude: zeros before the onset, the attack's ramp, the pieces' runs)
// against the envelope evaluated directly at every sample (core/envelope.hpp's formula).
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <cstddef>
#include <string>
#include <vector>

#include "core/envelope.hpp"
#include "core/rng.hpp"
#include "synthesis/amplitude_runs.hpp"

using namespace wane;

namespace {

/// The reference: one run alone, dest[n] = a, a *= ratio, written out plainly.
std::vector<float> played_alone(std::size_t count, double a, double ratio) {
    std::vector<float> out(count);
    for (std::size_t n = 0; n < count; ++n) {
        out[n] = static_cast<float>(a);
        a *= ratio;
    }
    return out;
}

}  // namespace

TEST_CASE("amplitude runs: played four at a time, every run gives the floats of its chain alone") {
    // Lengths that leave the groups of four uneven (and an empty run), decays and a rise.
    const std::vector<std::size_t> counts{1024, 700, 1024, 3, 0, 1024, 1024, 511, 1, 1024, 64};
    splitmix64 rng{20261203};
    std::vector<std::vector<float>> dest(counts.size());
    std::vector<std::vector<float>> expected;
    std::vector<amplitude_run> runs;
    for (std::size_t i = 0; i < counts.size(); ++i) {
        const double a = 1e-3 + static_cast<double>(rng.next() >> 11) * 0x1.0p-53;                  // (0.001, 1.001)
        const double ratio = 0.999 + 0.0015 * static_cast<double>(rng.next() >> 11) * 0x1.0p-53;  // decays and rises
        dest[i].assign(counts[i], -1.0f);
        expected.push_back(played_alone(counts[i], a, ratio));
        runs.push_back({.dest = dest[i].data(), .count = counts[i], .a = a, .ratio = ratio});
    }
    play_runs(runs);
    for (std::size_t i = 0; i < counts.size(); ++i) {
        std::size_t differing = 0;
        std::size_t first = counts[i];
        for (std::size_t n = 0; n < counts[i]; ++n) {
            if (dest[i][n] != expected[i][n]) {
                ++differing;
                first = std::min(first, n);
            }
        }
        INFO("run " << i << " of " << counts[i] << " samples: " << differing << " differ, the first at " << first
                    << (differing > 0 ? " (" + std::to_string(dest[i][first]) + " against " + std::to_string(expected[i][first]) + ")" : std::string()));
        CHECK(differing == 0);
    }
}

TEST_CASE("amplitude runs: piece_stop finds the first frame at or past the piece's end") {
    // Against the per-sample test itself, over ends on, between and beyond the frames.
    const double t0_s = 0.0123, dt_s = 1.0 / 48000.0;
    for (const double end_s : {0.0, 0.0123, 0.0124, 0.0123 + 100.0 * dt_s, 0.0123 + 1023.5 * dt_s, 1.0}) {
        for (const std::size_t from : {std::size_t{0}, std::size_t{10}, std::size_t{1024}}) {
            std::size_t expected = from;
            while (expected < 1024 && t0_s + static_cast<double>(expected) * dt_s < end_s) ++expected;
            INFO("end " << end_s << " s, from " << from);
            CHECK(piece_stop(t0_s, dt_s, end_s, from, 1024) == expected);
        }
    }
}

TEST_CASE("amplitude runs: a frame's amplitude across the onset, the attack and the pieces is the envelope's at every sample") {
    // Frames of 1024 samples at 48 kHz starting before the onset, inside the attack, across its
    // end and the pieces' joins; the attack's ramp exactly its formula's floats, the pieces' runs
    // within a relative 1e-6 (a chain of at most 1024 double products, then rounded to float).
    const double attack_s = GENERATE(0.0, 0.0004, 0.0049, 0.1911);
    const double t0_s = GENERATE(-0.0213, -0.0107, 0.0, 0.0031, 0.19, 0.2495);
    const envelope env{.attack_s = attack_s, .peak = level_db{-12.0},
                       .decay = {{.t60_s = 0.3, .until_s = attack_s + 0.01}, {.t60_s = -2.0, .until_s = attack_s + 0.03}, {.t60_s = 1.5, .until_s = {}}}};
    const std::vector<envelope_piece> pieces = envelope_pieces(env);
    const double peak_lin = to_amp(env.peak).lin;
    const double dt_s = 1.0 / 48000.0;
    std::vector<float> dest(1024, -1.0f);
    std::vector<amplitude_run> runs;
    fill_amplitude(env, pieces, peak_lin, t0_s, dt_s, dest, runs);
    play_runs(runs);
    int ramp_samples = 0;
    for (std::size_t n = 0; n < dest.size(); ++n) {
        const double t = t0_s + static_cast<double>(n) * dt_s;
        const auto got = static_cast<double>(dest[n]);
        INFO("attack " << attack_s << " s, t0 " << t0_s << " s, sample " << n << " at " << t << " s: " << got);
        if (t < 0.0) {
            REQUIRE(dest[n] == 0.0f);
        } else if (t < attack_s) {
            ++ramp_samples;
            REQUIRE(dest[n] == static_cast<float>(peak_lin * t / attack_s));
        } else {
            REQUIRE_THAT(got, Catch::Matchers::WithinRel(envelope_amp(env, pieces, t).lin, 1e-6));
        }
    }
    CAPTURE(ramp_samples);
    SUCCEED();
}

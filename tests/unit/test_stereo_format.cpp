// Stereo patches (format version 3): the pan law, the writer and reader round trip, the version
// rules (mono patches stay version 2 byte for byte, stereo needs version 3) and the validator's
// ranges. The reference is the format definition (patches/README.md) and the pan law's closed form
// (constant-power sine law: left = sqrt2 cos theta, right = sqrt2 sin theta, theta = (pan+1) pi/4).
#include <catch2/catch.hpp>

#include <cmath>
#include <numbers>
#include <string>

#include "core/patch.hpp"
#include "core/patch_rules.hpp"
#include "core/stereo.hpp"
#include "io/errors.hpp"
#include "io/patch_toml.hpp"
#include "patch_text.hpp"

using Catch::Matchers::Contains;
using Catch::Matchers::WithinAbs;
using namespace wane;
using wane::test::with;

namespace {

constexpr const char* stereo_text = R"(format = "wane-patch"
version = 3

[note]
f0_hz = 220.0
length_s = 2.0
channels = 2

[[partial]]
freq_hz = 220.0
harmonic = 1
pan = -0.25
delay_us = 350.5
peak_db = -12.0
decay = [ { t60_s = 1.5 } ]

[[partial]]
freq_hz = 440.0
harmonic = 2
pan = 0.6
delay_us = -20.0
spread_db_per_s = 4.5
peak_db = -18.0
decay = [ { t60_s = 1.2, until_s = 0.5 }, { t60_s = 2.0 } ]

[[noise]]
low_hz = 1000.0
high_hz = 2000.0
pan = 0.1
coherence = 0.4
peak_db = -40.0
decay = [ { t60_s = 0.1 } ]
)";

std::string error_of(const std::string& text) { return test::error_of(text, "st.toml"); }

}  // namespace

TEST_CASE("pan law: constant power, 0 dB per channel at centre, +3.01 dB at the hard side", "[stereo]") {
    const double pan = GENERATE(-1.0, -0.7, -0.25, 0.0, 0.3, 0.9, 1.0);
    const double l = pan_gain(pan, channel_side::left);
    const double r = pan_gain(pan, channel_side::right);
    const double theta = (pan + 1.0) * std::numbers::pi / 4.0;  // the law's closed form
    CAPTURE(pan, l, r);
    CHECK_THAT(l * l + r * r, WithinAbs(2.0, 1e-12));
    CHECK_THAT(l, WithinAbs(std::numbers::sqrt2 * std::cos(theta), 1e-12));
    if (std::abs(pan) < 1.0) {
        const double diff_db = pan_level_difference_db(pan);
        CHECK_THAT(diff_db, WithinAbs(20.0 * std::log10(std::tan(theta)), 1e-9));
        CHECK_THAT(pan_of_level_difference(diff_db), WithinAbs(pan, 1e-12));
        const pan_and_level pl = pan_of_amplitudes(0.5 * l, 0.5 * r);
        CHECK_THAT(pl.pan, WithinAbs(pan, 1e-12));
        CHECK_THAT(pl.level_db, WithinAbs(20.0 * std::log10(0.5), 1e-9));
    }
    if (pan == 0.0) CHECK_THAT(l, WithinAbs(1.0, 1e-15));
    if (pan == -1.0) CHECK_THAT(20.0 * std::log10(l), WithinAbs(10.0 * std::log10(2.0), 1e-12));  // +3.01 dB
}

TEST_CASE("a stereo patch round-trips byte for byte as version 3, its keys are read", "[stereo][patch]") {
    const auto r = parse_patch(stereo_text, "st.toml");
    CHECK(r.warnings.empty());
    const patch& p = r.value;
    REQUIRE(is_stereo(p));
    REQUIRE(p.partials.size() == 2);
    CHECK(p.partials[0].place.pan == -0.25);
    CHECK(p.partials[0].place.delay_us == 350.5);
    CHECK(p.partials[1].place.spread_db_per_s == 4.5);
    CHECK(p.noise[0].coherence == 0.4);
    CHECK(p.noise[0].place.pan == 0.1);
    const std::string text = format_patch(p);
    INFO(text);
    CHECK_THAT(text, Contains("version = 3\n"));
    CHECK_THAT(text, Contains("channels = 2\n"));
    CHECK_THAT(text, Contains("pan = -0.2500\ndelay_us = 350.50\n"));
    CHECK_THAT(text, Contains("spread_db_per_s = 4.500\n"));
    CHECK_THAT(text, Contains("coherence = 0.400\n"));
    CHECK(format_patch(parse_patch(text, "again").value) == text);
    CHECK(parse_patch(text, "again").value == p);
}

TEST_CASE("a mono patch is written as version 2 without any stereo key", "[stereo][patch]") {
    patch p = parse_patch(stereo_text, "st.toml").value;
    p.note.channels = 1;
    for (partial& q : p.partials) q.place = {};
    for (noise_band& b : p.noise) b.place = {}, b.coherence = 1.0;
    const std::string text = format_patch(p);
    INFO(text);
    CHECK_THAT(text, Contains("version = 2\n"));
    for (const char* key : {"channels", "pan =", "delay_us", "spread_db_per_s", "coherence"}) {
        CAPTURE(key);
        CHECK(text.find(key) == std::string::npos);
    }
}

TEST_CASE("stereo keys are refused out of range, in a mono patch and in a version 2 file", "[stereo][validate]") {
    struct bad {
        std::string from, to, words;
    };
    const bad c = GENERATE(values<bad>({
        {"pan = -0.25", "pan = -1.5", "partial 1: pan must be in [-1, 1]"},
        {"delay_us = 350.5", "delay_us = 60000", "partial 1: delay_us must be in [-50000, 50000] us"},
        {"spread_db_per_s = 4.5", "spread_db_per_s = 2000", "spread_db_per_s must be in [-1000, 1000] dB/s"},
        {"coherence = 0.4", "coherence = 1.2", "noise 1: coherence must be in [0, 1]"},
        {"channels = 2", "channels = 3", "note.channels must be 1 (mono) or 2"},
        {"channels = 2", "channels = 1", "partial 1: pan is a stereo key; this patch is mono"},
        {"version = 3", "version = 2", "note.channels = 2 (stereo) needs version = 3"},
    }));
    const std::string msg = error_of(with(stereo_text, c.from, c.to));
    CAPTURE(c.to, msg);
    CHECK_THAT(msg, Contains(c.words));
    CHECK_THAT(msg, Contains("st.toml:"));
}

TEST_CASE("channel_patch: each channel's level, phase and decay follow pan, delay and spread", "[stereo]") {
    const patch p = parse_patch(stereo_text, "st.toml").value;
    const patch left = channel_patch(p, channel_side::left);
    const patch right = channel_patch(p, channel_side::right);
    CHECK_FALSE(is_stereo(left));
    const partial& q = p.partials[1];  // 440 Hz, pan 0.6, delay -20 us, spread 4.5 dB/s
    const double f = q.freq_hz;
    CHECK_THAT(left.partials[1].env.peak.db - right.partials[1].env.peak.db,
               WithinAbs(-pan_level_difference_db(0.6), 1e-12));
    // Right lags left by d: the right's phase minus the left's is -2 pi f d.
    CHECK_THAT(right.partials[1].phase_rad - left.partials[1].phase_rad,
               WithinAbs(-2.0 * std::numbers::pi * f * -20e-6, 1e-12));
    // The right-minus-left level difference grows 4.5 dB per second after the attack.
    for (const double t_s : {0.2, 0.5, 1.0, 1.7}) {
        const double diff = envelope_level(right.partials[1].env, t_s).db - envelope_level(left.partials[1].env, t_s).db;
        CAPTURE(t_s, diff);
        CHECK_THAT(diff, WithinAbs(pan_level_difference_db(0.6) + 4.5 * t_s, 1e-9));
    }
    // A mono patch is its own channel patch.
    patch mono = p;
    mono.note.channels = 1;
    CHECK(channel_patch(mono, channel_side::right) == mono);
}

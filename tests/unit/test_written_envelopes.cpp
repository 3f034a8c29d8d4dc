// Envelopes the analysis writes: breakpoints closer than the file's time precision (0.1 ms,
// core/patch_numbers) are merged before the patch is written, so every analysed patch loads again.
// References: the format's own rules (core/patch_rules: breakpoints strictly increasing once
// rounded) and levels written out by hand from the segments' slopes.
#include <catch2/catch.hpp>

#include <optional>
#include <string>

#include "analysis/analyze.hpp"
#include "core/envelope.hpp"
#include "core/patch_numbers.hpp"
#include "core/patch_rules.hpp"
#include "io/audio_file.hpp"

using Catch::Matchers::WithinAbs;
using namespace wane;

namespace {

patch one_partial(const envelope& env) {
    patch p;
    p.note.length_s = 2.0;
    p.partials.push_back({.freq_hz = 440.0, .harmonic = 1, .phase_rad = 0.0, .env = env});
    return p;
}

}  // namespace

TEST_CASE("two segment ends within 0.1 ms: the short segment is dropped, the patch loads, later levels move < 0.01 dB",
          "[patch][analysis]") {
    // Ends at 0.11996 s and 0.12004 s both write as 0.1200: the file would hold equal breakpoints.
    const envelope original{.attack_s = 0.01, .peak = level_db{-10.0},
                            .decay = {{.t60_s = 1.0, .until_s = 0.11996},   // 60 dB/s
                                      {.t60_s = 0.5, .until_s = 0.12004},   // 120 dB/s, for 0.08 ms
                                      {.t60_s = 2.0, .until_s = 0.5},       // 30 dB/s
                                      {.t60_s = 6.0, .until_s = {}}}};
    const std::string before = patch_rules::first_broken_rule(one_partial(original)).value_or("");
    CAPTURE(before);
    REQUIRE_FALSE(before.empty());  // the collision the function is for

    envelope env = original;
    CHECK(patch_numbers::drop_unwritable_segments(env) == 1);
    REQUIRE(env.decay.size() == 3);
    CHECK(env.decay[0].until_s == original.decay[0].until_s);
    CHECK(env.decay[1].t60_s == 2.0);  // the 30 dB/s segment now starts at 0.11996 s
    const std::string after = patch_rules::first_broken_rule(one_partial(env)).value_or("");
    CAPTURE(after);
    CHECK(after.empty());
    // By hand: the dropped 0.08 ms fell 120 dB/s where the next one falls 30 dB/s, so every later
    // level is (120 - 30) x 0.00008 = 0.0072 dB higher.
    for (const double t : {0.2, 0.5, 1.0}) {
        const double was = envelope_level(original, t).db, now = envelope_level(env, t).db;
        CAPTURE(t, was, now);
        CHECK_THAT(now - was, WithinAbs(0.0072, 1e-9));
    }
    // Envelopes without such a collision are left as they are.
    envelope clean = original;
    clean.decay.erase(clean.decay.begin() + 1);
    const envelope kept = clean;
    CHECK(patch_numbers::drop_unwritable_segments(clean) == 0);
    CHECK(clean == kept);
}

TEST_CASE("real banjo with the rise search over 4 partials: the analysed patch follows every rule of the format",
          "[patch][analysis][real]") {
    // With onset_refine_params::alone_attack_partials = 4 the onset refinement joined a partial's
    // envelope so that two of its segment ends wrote as the same 0.12 s, and the patch failed to load.
    const mono_audio a = read_audio(std::string(WANE_TEST_DATA_DIR) + "/real-notes/banjo_g3.wav");
    analysis_params params{};
    params.onset.alone_attack_partials = GENERATE(std::size_t{4}, std::size_t{8});
    const analysis_result r = analyze_note(a.samples, a.sample_rate_hz, params);
    const std::string broken = patch_rules::first_broken_rule(r.value).value_or("");
    CAPTURE(params.onset.alone_attack_partials, broken);
    CHECK(broken.empty());
}

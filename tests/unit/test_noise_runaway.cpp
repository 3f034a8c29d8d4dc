// A floor band's fitted line held to the levels it was fitted on (analysis/noise_model.hpp,
// held_to_measured): a line running far over every measured frame is lowered to their maximum, one
// within floor_runaway_db of it is left as fitted.
#include <catch2/catch.hpp>

#include <algorithm>
#include <vector>

#include "analysis/noise_model.hpp"
#include "core/envelope.hpp"

using Catch::Matchers::WithinAbs;
using namespace wane;

namespace {

/// A near-silent band: 200 frames 10 ms apart, levels scattered in a fixed pattern around -100 dB
/// (loudest -97 dB at frame 37).
noise_band_track quiet_track() {
    noise_band_track t{.low_hz = 141.25, .high_hz = 177.83, .hop_s = 0.01, .level_db = {}, .leak_db = {}};
    for (int i = 0; i < 200; ++i) t.level_db.push_back(static_cast<float>(-100.0 + ((i * 7) % 5 - 2) * 0.5));
    t.level_db[37] = -97.0F;
    return t;
}

}  // namespace

TEST_CASE("a floor band's line rising far over every measured frame is lowered to their maximum", "[noise]") {
    const noise_band_track t = quiet_track();
    const double rise_s = GENERATE(0.5, 1.0, 1.9);
    // A rise to -65 dB, then a fall: 32 dB over the loudest frame at its top.
    const envelope fitted{.attack_s = rise_s, .peak = level_db{-65.0}, .decay = {{.t60_s = 1.2, .until_s = {}}}};
    const envelope held = held_to_measured(fitted, t, 10, 190);
    double top_db = -1e9;
    for (std::size_t i = 10; i < 190; ++i) top_db = std::max(top_db, envelope_level(held, static_cast<double>(i) * t.hop_s).db);
    CAPTURE(rise_s, held.peak.db, top_db);
    CHECK_THAT(top_db, WithinAbs(-97.0, 1e-9));
    CHECK(held.attack_s == fitted.attack_s);
    CHECK(held.decay == fitted.decay);
}

TEST_CASE("a floor band's line within the runaway margin of the loudest frame is kept as fitted", "[noise]") {
    const noise_band_track t = quiet_track();
    const double over_db = GENERATE(0.0, 3.0, floor_runaway_db - 0.5);
    const envelope fitted{.attack_s = 0.0, .peak = level_db{-97.0 + over_db}, .decay = {{.t60_s = 30.0, .until_s = {}}}};
    const envelope held = held_to_measured(fitted, t, 0, 200);
    CAPTURE(over_db, held.peak.db);
    CHECK(held == fitted);
}

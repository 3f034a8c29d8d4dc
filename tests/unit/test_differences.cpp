// Where a copy differs from its recording (src/measure/differences, remarks): a synthetic struck
// bar (exact sum of damped cosines, double precision, seeded noise at -100 dBFS) against renders
// of its patch with one planted defect each (a missing mode, a mode 6 dB too loud, a 30 ms
// attack). The largest difference region and the sentences must name the defect at its band and
// time; the render of the exact patch gets no sentence.
#include <catch2/catch.hpp>

#include <algorithm>
#include <array>
#include <cmath>
#include <string>
#include <vector>

#include "core/patch.hpp"
#include "core/units.hpp"
#include "measure/differences.hpp"
#include "measure/remarks.hpp"
#include "synthesis/render.hpp"
#include "test_signals.hpp"

using Catch::Matchers::WithinAbs;
using namespace wane;

namespace {

constexpr double rate_hz = 48000.0;
constexpr double lead_s = 0.1;      // silence before the onset
constexpr double length_s = 1.9;    // note after the onset
constexpr double f1_hz = 220.0;

/// Free-free uniform bar: mode frequency ratios 1, 2.756, 5.404, 8.933, 13.34 (Euler-Bernoulli
/// beam, (2n+1)^2 / 9 asymptotically; values from memory). Each lies in its own third-octave band.
constexpr std::array<double, 5> bar_ratios = {1.0, 2.756, 5.404, 8.933, 13.34};
constexpr std::array<double, 5> bar_amps = {0.30, 0.20, 0.15, 0.12, 0.08};
constexpr std::array<double, 5> bar_t60_s = {3.0, 2.0, 1.2, 0.9, 0.6};

std::vector<float> recording() {
    std::vector<test::decaying_partial> modes;
    for (std::size_t i = 0; i < bar_ratios.size(); ++i) {
        modes.push_back({.freq_hz = f1_hz * bar_ratios[i], .amp_lin = bar_amps[i], .t60_s = bar_t60_s[i],
                         .phase_rad = 0.3 * static_cast<double>(i)});
    }
    return test::decaying_partials(modes, rate_hz, lead_s + length_s, lead_s, 1e-5, 20);
}

patch bar_patch() {
    patch p;
    p.note.length_s = length_s;
    for (std::size_t i = 0; i < bar_ratios.size(); ++i) {
        partial q{.freq_hz = f1_hz * bar_ratios[i], .phase_rad = 0.3 * static_cast<double>(i), .env = {}};
        q.env.peak = to_level(amp_lin{bar_amps[i]});
        q.env.decay = {decay_segment{.t60_s = bar_t60_s[i], .until_s = {}}};
        p.partials.push_back(q);
    }
    return p;
}

/// The render of p placed after the same lead as the recording (aligned sample for sample).
std::vector<float> copy_of(const patch& p) {
    const std::vector<float> r = render_patch(p, {.sample_rate_hz = rate_hz});
    std::vector<float> out(static_cast<std::size_t>(std::llround(lead_s * rate_hz)), 0.0f);
    out.insert(out.end(), r.begin(), r.end());
    return out;
}

const std::size_t onset_frames = static_cast<std::size_t>(std::llround(lead_s * rate_hz));

int band_of(const difference_cells& c, double f_hz) {
    for (int i = 0; i < c.bands; ++i) {
        if (f_hz >= c.band_edges_hz[static_cast<std::size_t>(i)] && f_hz < c.band_edges_hz[static_cast<std::size_t>(i) + 1]) return i;
    }
    return -1;
}

std::string all_sentences(const copy_remarks& r) {
    std::string s;
    for (const std::string& line : r.sentences) s += line + "\n";
    return s;
}

}  // namespace

TEST_CASE("the exact patch's copy gets no difference sentence", "[differences]") {
    const std::vector<float> a = recording();
    const copy_remarks r = remark_on_copy(a, copy_of(bar_patch()), rate_hz, onset_frames);
    INFO(all_sentences(r));
    CAPTURE(r.rise_a_s, r.rise_b_s);
    CHECK(r.sentences.empty());
    CHECK(r.regions.empty());
    CHECK(r.missing.empty());
    CHECK_FALSE(r.onset_smeared);
}

TEST_CASE("a missing mode is the largest difference, in its band, from the onset, and named by frequency",
          "[differences]") {
    const std::size_t mode = GENERATE(1u, 2u, 3u, 4u);
    patch p = bar_patch();
    const double f_hz = p.partials[mode].freq_hz;
    p.partials.erase(p.partials.begin() + static_cast<std::ptrdiff_t>(mode));
    const copy_remarks r = remark_on_copy(recording(), copy_of(p), rate_hz, onset_frames);
    const std::string text = all_sentences(r);
    CAPTURE(mode, f_hz, text);
    REQUIRE_FALSE(r.regions.empty());
    const difference_region& top = r.regions.front();
    CAPTURE(top.band_first, top.band_last, top.time_first, top.time_last, top.mean_diff_db);
    const int band = band_of(r.cells, f_hz);
    CHECK(top.band_first <= band);
    CHECK(top.band_last >= band);
    CHECK(top.band_last - top.band_first <= 2);  // the mode's band and at most its leakage neighbours
    CHECK(top.time_first == 0);
    CHECK(top.mean_diff_db < -10.0);
    REQUIRE_FALSE(r.missing.empty());
    // Within one bin of the 0.1 s Blackman-Harris spectrum (zero padding 2: 5 Hz).
    CHECK_THAT(r.missing.front().freq_hz, WithinAbs(f_hz, 5.0));
    CHECK(r.missing.size() == 1);
    CHECK(text.find("missing from the copy") != std::string::npos);
    CHECK(text.find("too quiet") != std::string::npos);
    CHECK_FALSE(r.onset_smeared);
}

TEST_CASE("a mode 6 dB too loud is the largest difference, +6 dB in its band throughout", "[differences]") {
    const std::size_t mode = GENERATE(1u, 2u, 3u, 4u);
    patch p = bar_patch();
    p.partials[mode].env.peak.db += 6.0;
    const double f_hz = p.partials[mode].freq_hz;
    const copy_remarks r = remark_on_copy(recording(), copy_of(p), rate_hz, onset_frames);
    const std::string text = all_sentences(r);
    CAPTURE(mode, f_hz, text);
    REQUIRE_FALSE(r.regions.empty());
    const difference_region& top = r.regions.front();
    CAPTURE(top.band_first, top.band_last, top.time_first, top.time_last, top.mean_diff_db, top.largest_diff_db);
    // The mode's band, and at most its neighbours, whose level is the mode's leakage.
    CHECK(top.band_first <= band_of(r.cells, f_hz));
    CHECK(top.band_last >= band_of(r.cells, f_hz));
    CHECK(top.band_last - top.band_first <= 2);
    CHECK(top.time_first == 0);
    // The band holds the mode alone, so the cell difference is the planted 6 dB (within the
    // leakage of its neighbours through the Hann window's sidelobes, -31 dB: well under 1 dB).
    CHECK_THAT(top.largest_diff_db, WithinAbs(6.0, 1.0));
    CHECK_THAT(top.mean_diff_db, WithinAbs(6.0, 1.0));
    CHECK(r.missing.empty());
    CHECK(text.find("dB too loud between") != std::string::npos);
    CHECK_FALSE(r.onset_smeared);
}

TEST_CASE("a 30 ms attack is a smeared onset: quiet in the first 20 ms across the bands", "[differences]") {
    patch p = bar_patch();
    for (partial& q : p.partials) q.env.attack_s = 0.030;
    const copy_remarks r = remark_on_copy(recording(), copy_of(p), rate_hz, onset_frames);
    const std::string text = all_sentences(r);
    CAPTURE(text, r.rise_a_s, r.rise_b_s);
    CHECK(r.onset_smeared);
    // Amplitude t / 30 ms reaches -3 dB (0.708) at 21 ms; 2 ms frames every 1 ms.
    CHECK_THAT(r.rise_b_s, WithinAbs(0.021, 0.003));
    CHECK(r.rise_a_s < 0.003);
    REQUIRE_FALSE(r.regions.empty());
    const difference_region& top = r.regions.front();
    CAPTURE(top.band_first, top.band_last, top.time_first, top.time_last, top.mean_diff_db);
    CHECK(top.time_first == 0);
    CHECK(top.time_last <= 1);  // the first 20 ms (and the 20-50 ms cell where the rise ends)
    CHECK(top.mean_diff_db < -3.0);
    // Every mode's band takes part: the region spans the lowest to the highest mode.
    CHECK(top.band_first <= band_of(r.cells, f1_hz * bar_ratios.front()));
    CHECK(top.band_last >= band_of(r.cells, f1_hz * bar_ratios.back()));
    CHECK(text.find("the onset is smeared") != std::string::npos);
    CHECK(text.find("too quiet") != std::string::npos);
}

TEST_CASE("region sentences name the band and the time span in words", "[differences]") {
    const difference_region r{.low_hz = 2000.0, .high_hz = 4000.0, .from_s = 0.0, .to_s = 0.02, .mean_diff_db = -9.0};
    CHECK(region_sentence(r, 24000.0) == "the copy is 9.0 dB too quiet between 2 and 4 kHz in the first 20 ms");
    const difference_region late{.low_hz = 0.0, .high_hz = 125.0, .from_s = 0.5, .to_s = 3.0, .to_end = true,
                                 .mean_diff_db = 12.4};
    CHECK(region_sentence(late, 24000.0) == "the copy is 12 dB too loud below 125 Hz from 500 ms to the end");
}

TEST_CASE("patch remarks count the partials that end in a held level and name the cut", "[differences]") {
    patch p = bar_patch();
    CHECK(patch_remarks(p).empty());
    for (std::size_t i = 0; i < 3; ++i) p.partials[i].env.decay.push_back(decay_segment{.t60_s = infinity, .until_s = {}});
    p.partials[0].env.decay.front().until_s = 0.5;
    p.partials[1].env.decay.front().until_s = 0.5;
    p.partials[2].env.decay.front().until_s = 0.5;
    p.source.cut_s = 1.5;
    const std::vector<std::string> s = patch_remarks(p);
    REQUIRE(s.size() == 1);
    CHECK(s.front() == "3 partials end in a held level: the recording was cut at 1.5 s while the note still sounded");
}

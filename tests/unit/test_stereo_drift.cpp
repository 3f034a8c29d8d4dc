// A partial's pan and spread over many spans (analysis/stereo_drift.hpp), and the spread the
// stereo analysis finds on a synthetic note. References: exact ground truth. For the pure
// function, spans built from a known line of level differences (the spread and the pan at the
// attack's end are the line's slope and value, to rounding) or from a known swing around a constant
// (the pan is the energy ratio of the spans within the first second, computed here independently;
// no spread). For the analysis, a two-channel note whose channels decay with their own T60s: the
// right-minus-left difference moves by exactly 60/T60_L - 60/T60_R dB/s.
#include <catch2/catch.hpp>

#include <cmath>
#include <numbers>
#include <vector>

#include "analysis/stereo_drift.hpp"
#include "analysis/stereo_place.hpp"
#include "core/rng.hpp"
#include "core/stereo.hpp"
#include "core/units.hpp"

using Catch::Matchers::WithinAbs;
using namespace wane;

namespace {

constexpr double span_s = 0.15;
constexpr double step_s = 0.3;

/// Spans every step_s (midpoints step_s j + span_s / 2) of a partial whose level falls 20 dB/s
/// in the mix and whose right-minus-left difference is diff_db(t).
template <class F>
std::vector<channel_amplitudes> spans_of(int count, F diff_db) {
    std::vector<channel_amplitudes> out;
    for (int j = 0; j < count; ++j) {
        const double t = step_s * j + span_s / 2.0;
        const double level_db = -10.0 - 20.0 * t;
        const double d = diff_db(t);
        // Channel levels level -+ d/2 (their mean in dB is the mix's level).
        out.push_back({.time_s = t,
                       .left_amp = std::pow(10.0, (level_db - d / 2.0) / 20.0),
                       .right_amp = std::pow(10.0, (level_db + d / 2.0) / 20.0)});
    }
    return out;
}

/// The pan of the spans ending within the first second, by their energies (stereo_drift.hpp).
double first_second_diff_db(const std::vector<channel_amplitudes>& spans) {
    double l = 0.0, r = 0.0;
    for (const channel_amplitudes& c : spans) {
        if (c.time_s + span_s / 2.0 > 1.0) continue;
        l += c.left_amp * c.left_amp;
        r += c.right_amp * c.right_amp;
    }
    return 10.0 * std::log10(r / l);
}

/// The strongest partial of the stereo analysis (no peak match) of left and right with their mix,
/// and the onset the analysis found.
struct strongest_placed {
    partial q;
    double onset_s = 0.0;
};

strongest_placed analyse_strongest(const std::vector<float>& mix, const std::vector<float>& left,
                                   const std::vector<float>& right, double fs) {
    analysis_params ap;
    ap.match_peak = false;
    const patch p = analyze_stereo_note(mix, left, right, fs, ap, {}).value;
    REQUIRE_FALSE(p.partials.empty());
    const partial* q = &p.partials.front();
    for (const partial& c : p.partials)
        if (c.env.peak.db > q->env.peak.db) q = &c;
    return {*q, p.source.onset_s};
}

}  // namespace

TEST_CASE("drift: a level difference moving on a line gives the line's slope and its value at the attack's end",
          "[stereo][drift]") {
    const double slope = GENERATE(-12.0, -3.5, 2.0, 8.0);
    const double start_db = GENERATE(-9.0, 0.0, 4.0);
    const double attack_s = GENERATE(0.0, 0.02);
    const int count = GENERATE(3, 7, 12);
    const auto spans = spans_of(count, [&](double t) { return start_db + slope * t; });
    const auto d = drift_of_spans(spans, span_s, attack_s, 100.0, {});
    REQUIRE(d.has_value());
    const double move_db = std::abs(slope) * (spans.back().time_s - spans.front().time_s);
    CAPTURE(slope, start_db, attack_s, count, move_db, d->spread_db_per_s, d->pan);
    if (move_db < drift_params{}.min_move_db) {  // too small a move over the spans: the pan alone
        CHECK(d->spread_db_per_s == 0.0);
        return;
    }
    CHECK_THAT(d->spread_db_per_s, WithinAbs(slope, 1e-9));
    CHECK_THAT(pan_level_difference_db(d->pan), WithinAbs(start_db + slope * attack_s, 1e-9));
}

TEST_CASE("drift: a swing of the difference back and forth keeps the first second's energy pan, no spread",
          "[stereo][drift]") {
    // Two close modes beating with their own phase in each channel: the difference swings by
    // +-swing_db around centre_db with a period of several spans. A line through the first span
    // and the one at 0.8 s (the rule this replaces) would read a steady move of up to 2 swing_db.
    const double swing_db = GENERATE(4.0, 8.0, 15.0);
    const double centre_db = GENERATE(-6.0, 0.0, 3.0);
    const double period_s = GENERATE(1.3, 2.1);
    const auto spans = spans_of(12, [&](double t) {
        return centre_db + swing_db * std::sin(2.0 * std::numbers::pi * t / period_s);
    });
    const auto d = drift_of_spans(spans, span_s, 0.0, 100.0, {});
    REQUIRE(d.has_value());
    const double want_db = first_second_diff_db(spans);
    CAPTURE(swing_db, centre_db, period_s, d->spread_db_per_s, pan_level_difference_db(d->pan), want_db);
    CHECK(d->spread_db_per_s == 0.0);
    CHECK_THAT(pan_level_difference_db(d->pan), WithinAbs(want_db, 1e-9));
}

TEST_CASE("drift: two spans give no spread however far apart they lie, the slope is bounded", "[stereo][drift]") {
    const auto two = spans_of(2, [](double t) { return 10.0 * t; });
    const auto d2 = drift_of_spans(two, span_s, 0.0, 100.0, {});
    REQUIRE(d2.has_value());
    CAPTURE(d2->spread_db_per_s, pan_level_difference_db(d2->pan), first_second_diff_db(two));
    CHECK(d2->spread_db_per_s == 0.0);
    CHECK_THAT(pan_level_difference_db(d2->pan), WithinAbs(first_second_diff_db(two), 1e-9));
    const auto many = spans_of(10, [](double t) { return 30.0 * t; });
    const auto bounded = drift_of_spans(many, span_s, 0.0, 12.0, {});
    REQUIRE(bounded.has_value());
    CAPTURE(bounded->spread_db_per_s);
    CHECK(bounded->spread_db_per_s == 12.0);
    CHECK_FALSE(drift_of_spans({}, span_s, 0.0, 12.0, {}).has_value());
}

TEST_CASE("stereo analysis: channels decaying at their own rates give that spread within 0.5 dB/s", "[stereo][analysis][drift]") {
    // One partial per case at 330 Hz, T60 left and right from the table, onset at 0.1 s, seeded
    // white noise at -80 dB in each channel. Truth: the difference moves 60/T60_L - 60/T60_R dB/s;
    // each channel's level at the onset is the one synthesized. The cases keep the spread under the
    // slower channel's fall: the format bounds it there (neither channel may rise).
    constexpr double fs = 48000.0;
    const auto [t60_left_s, t60_right_s] = GENERATE(table<double, double>(
        {{2.0, 1.6}, {2.0, 2.5}, {3.0, 2.5}, {3.0, 3.0}, {1.5, 2.0}, {2.5, 1.8}}));
    const double left_db = -12.0, right_db = -16.0, onset_s = 0.1, length_s = 3.0, f_hz = 330.0;
    const auto n = static_cast<std::size_t>(length_s * fs);
    std::vector<float> left(n), right(n), mix(n);
    splitmix64 rng{41};
    const double noise = std::pow(10.0, -80.0 / 20.0);
    for (std::size_t i = 0; i < n; ++i) {
        const double t = static_cast<double>(i) / fs - onset_s;
        double l = noise * rng.gaussian(), r = noise * rng.gaussian();
        if (t >= 0.0) {
            const double c = std::cos(2.0 * std::numbers::pi * f_hz * t + 0.4);
            l += std::pow(10.0, left_db / 20.0) * std::exp(-ln1000 / t60_left_s * t) * c;
            r += std::pow(10.0, right_db / 20.0) * std::exp(-ln1000 / t60_right_s * t) * c;
        }
        left[i] = static_cast<float>(l);
        right[i] = static_cast<float>(r);
        mix[i] = 0.5f * (left[i] + right[i]);
    }
    const auto [strongest, found_onset_s] = analyse_strongest(mix, left, right, fs);
    const partial* q = &strongest;
    const double want_spread = 60.0 / t60_left_s - 60.0 / t60_right_s;
    CAPTURE(t60_left_s, t60_right_s, q->freq_hz, q->place.pan, q->place.spread_db_per_s, want_spread, found_onset_s);
    CHECK_THAT(q->place.spread_db_per_s, WithinAbs(want_spread, 0.5));
    // The channels' levels at the patch's t = 0 (the onset the analysis found).
    const double shift_s = found_onset_s - onset_s;
    for (const channel_side side : {channel_side::left, channel_side::right}) {
        const bool is_left = side == channel_side::left;
        const double want = (is_left ? left_db : right_db) - 60.0 / (is_left ? t60_left_s : t60_right_s) * shift_s;
        const double got = q->env.peak.db + 20.0 * std::log10(pan_gain(q->place.pan, side));
        CAPTURE(is_left, want, got);
        CHECK_THAT(got, WithinAbs(want, 0.5));
    }
}

TEST_CASE("stereo analysis: a partial beating in opposite phase in the two channels gets no spread",
          "[stereo][analysis][drift]") {
    // Two modes 0.8 Hz apart, the second at half the first's amplitude and in opposite phase in the
    // right channel: the mix holds the first mode alone, each channel beats (the right-minus-left
    // difference swings between -9.5 and +9.5 dB every 1.25 s). Truth: no steady move (spread 0);
    // the pan near the channels' energy ratio over the first second, computed here from the
    // synthesized channels (within 1.5 dB: the spans sample that second, they do not cover it).
    constexpr double fs = 48000.0;
    const double beat_hz = GENERATE(0.6, 0.8);
    const double onset_s = 0.1, length_s = 3.7, f_hz = 440.0, t60_s = 2.5, level_db = -14.0;
    const auto n = static_cast<std::size_t>(length_s * fs);
    std::vector<float> left(n), right(n), mix(n);
    splitmix64 rng{43};
    const double noise = std::pow(10.0, -80.0 / 20.0);
    double energy_left = 0.0, energy_right = 0.0;
    for (std::size_t i = 0; i < n; ++i) {
        const double t = static_cast<double>(i) / fs - onset_s;
        double l = noise * rng.gaussian(), r = noise * rng.gaussian();
        if (t >= 0.0) {
            const double a = std::pow(10.0, level_db / 20.0) * std::exp(-ln1000 / t60_s * t);
            const double m1 = a * std::cos(2.0 * std::numbers::pi * f_hz * t + 0.3);
            const double m2 = 0.5 * a * std::cos(2.0 * std::numbers::pi * (f_hz + beat_hz) * t + 0.3);
            l += m1 + m2;
            r += m1 - m2;
            if (t < 1.0) {
                energy_left += (m1 + m2) * (m1 + m2);
                energy_right += (m1 - m2) * (m1 - m2);
            }
        }
        left[i] = static_cast<float>(l);
        right[i] = static_cast<float>(r);
        mix[i] = 0.5f * (left[i] + right[i]);
    }
    const partial strongest = analyse_strongest(mix, left, right, fs).q;
    const partial* q = &strongest;
    const double want_db = 10.0 * std::log10(energy_right / energy_left);
    CAPTURE(beat_hz, q->freq_hz, q->place.pan, pan_level_difference_db(q->place.pan), want_db, q->place.spread_db_per_s);
    CHECK(q->place.spread_db_per_s == 0.0);
    CHECK_THAT(pan_level_difference_db(q->place.pan), WithinAbs(want_db, 1.5));
}

// The peak match (analysis/peak_match.hpp): the copy's expected peak, the median of the peaks of
// several noise draws at 48 kHz, rendered here one by one in full (render_patch), is brought
// within the tolerance of the recording's peak, the fitted level kept where it already is; the
// partials' level does not follow one draw's luck; the default draw's render stays under full
// scale, and where only its noise would break that, the noise gives way; a quiet default draw
// still peaks within the allowed miss.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <vector>

#include "analysis/peak_match.hpp"
#include "core/noise_bands.hpp"
#include "synthesis/render.hpp"

using namespace wane;

namespace {

double peak_db(const std::vector<float>& x) {
    float m = 0.0f;
    for (float v : x) m = std::max(m, std::abs(v));
    return 20.0 * std::log10(static_cast<double>(m));
}

/// A plucked string's copy: one partial at 110 Hz (partial_db, T60 1 s) and noise bands up to
/// 20 kHz, the lowest at first_band_db and each next one 1.5 dB lower (attack 2 ms, T60 0.25 s).
/// Numbers at file precision.
patch string_copy(double partial_db, double first_band_db) {
    patch p;
    p.note.length_s = 1.5;
    p.partials.push_back({.freq_hz = 110.0, .harmonic = 1, .phase_rad = 0.0,
                          .env = {.attack_s = 0.0, .peak = level_db{partial_db}, .decay = {{.t60_s = 1.0, .until_s = {}}}}});
    double level = first_band_db;
    for (const band_edges& e : noise_band_layout(20000.0)) {
        p.noise.push_back({.low_hz = e.low_hz, .high_hz = e.high_hz,
                           .env = {.attack_s = 0.002, .peak = level_db{level}, .decay = {{.t60_s = 0.25, .until_s = {}}}}});
        level -= 1.5;
    }
    canonicalize(p);
    return p;
}

/// A recording that peaks at peak_lin (one sample).
std::vector<float> recording(double rate_hz, float peak_lin) {
    std::vector<float> note(static_cast<std::size_t>(rate_hz), 0.0f);
    note[100] = peak_lin;
    return note;
}

/// The peaks (dB) of p's full renders at rate_hz, gain 0, seeds first .. first + draws - 1.
std::vector<double> draw_peaks_db(patch p, double rate_hz, std::uint64_t first, int draws) {
    p.note.gain_db = 0.0;
    std::vector<double> peaks;
    peaks.reserve(static_cast<std::size_t>(draws));
    for (int k = 0; k < draws; ++k)
        peaks.push_back(peak_db(render_patch(p, {.sample_rate_hz = rate_hz, .noise_seed = first + static_cast<std::uint64_t>(k)})));
    return peaks;
}

double median(std::vector<double> v) {
    std::sort(v.begin(), v.end());
    return v[v.size() / 2];
}

}  // namespace

TEST_CASE("without noise the gain is the one nearest 0 that brings the copy's peak within the tolerance",
          "[peak_match]") {
    // The partial peaks at -3 dBFS exactly (phase 0 at t = 0). The recording's peak: near it
    // (the fitted level stays), far under it, and over the headroom (the target is -0.3 dBFS).
    patch p = string_copy(-3.0, -20.0);
    p.noise.clear();
    const double rate_hz = 44100.0;
    const auto [peak_lin, target_db] = GENERATE(std::pair{0.66f, 20.0 * std::log10(0.66)}, std::pair{0.25f, 20.0 * std::log10(0.25)},
                                                std::pair{1.0f, -peak_headroom_db});
    const peak_match_result r = match_copy_peak(p, recording(rate_hz, peak_lin), rate_hz);
    const double want_db = std::clamp(0.0, target_db + 3.0 - peak_tolerance_db, target_db + 3.0 + peak_tolerance_db);
    p.note.gain_db = r.gain_db;
    const double copy_db = peak_db(render_patch(p, {.sample_rate_hz = rate_hz}));
    CAPTURE(peak_lin, target_db, r.gain_db, want_db, copy_db);
    CHECK(std::abs(r.gain_db - want_db) < 0.001);
    CHECK(std::abs(copy_db - (-3.0 + want_db)) < 0.001);
    CHECK(r.held_down_db == 0.0);
}

TEST_CASE("the gain keeps the fitted level unless the draws' median peak lies more than the tolerance off",
          "[peak_match]") {
    const patch p = string_copy(-9.0, -21.0);
    const double rate_hz = GENERATE(44100.0, 48000.0);
    const peak_match_params params{};
    // The reference: every draw rendered in full at the default output rate (the match renders
    // the other draws only where the copy is loud); the recording peaks offset_db from their median.
    const double median_db = median(draw_peaks_db(p, default_output_rate_hz, params.first_seed, params.draws));
    const double offset_db = GENERATE(-3.0, -0.6, -0.3, 0.0, 0.4, 2.0);
    const auto peak_lin = static_cast<float>(std::pow(10.0, (median_db + offset_db) / 20.0));
    const peak_match_result r = match_copy_peak(p, recording(rate_hz, peak_lin), rate_hz, params);
    const double want_db = std::clamp(0.0, offset_db - peak_tolerance_db, offset_db + peak_tolerance_db);
    CAPTURE(rate_hz, median_db, offset_db, r.gain_db, r.expected_gain_db, want_db);
    CHECK(std::abs(r.expected_gain_db - want_db) < 0.001);
    CHECK(r.gain_db == r.expected_gain_db);
}

TEST_CASE("the expected peak is the draws' median also where draws peak late and far under the default draw",
          "[peak_match]") {
    // A burst of noise at the onset (T60 50 ms) and a partial that rises over 0.2 s to partial_db
    // and holds: a draw whose burst peaks under the partial peaks late, well under the default
    // draw's burst (the match renders the other draws first near where the default one can peak,
    // then further for those that peak lower). Reference: every draw rendered in full.
    const double partial_db = GENERATE(-5.5, -5.9);
    const double first_band_db = -15.0;
    patch p = string_copy(partial_db, first_band_db);
    p.partials[0].env = {.attack_s = 0.2, .peak = level_db{partial_db}, .decay = {{.t60_s = 20.0, .until_s = {}}}};
    for (noise_band& b : p.noise) b.env.decay[0].t60_s = 0.05;
    // The default draw: seed 9, whose burst peaks highest (about -4.1 dB; the others -5.6 to -8).
    const peak_match_params params{.first_seed = 1, .draws = 9, .default_seed = 9};
    const std::vector<double> peaks_db = draw_peaks_db(p, default_output_rate_hz, params.first_seed, params.draws);
    const double median_db = median(peaks_db);
    const double offset_db = GENERATE(-3.0, 2.0);
    const auto peak_lin = static_cast<float>(std::pow(10.0, (median_db + offset_db) / 20.0));
    const peak_match_result r = match_copy_peak(p, recording(48000.0, peak_lin), 48000.0, params);
    const double want_db = std::clamp(0.0, offset_db - peak_tolerance_db, offset_db + peak_tolerance_db);
    CAPTURE(partial_db, first_band_db, peaks_db, median_db, offset_db, r.expected_gain_db, want_db);
    CHECK(std::abs(r.expected_gain_db - want_db) < 0.001);
}

TEST_CASE("draws first rendered with their loud bands alone give the gain of draws rendered with every band",
          "[peak_match]") {
    // Four loud bands and quiet ones (-95 dB: their bound stands for them), the recording's peak
    // on either side of both tolerance edges, down to 0.005 dB from them (where the quiet bands'
    // bound leaves the gain open and every band must be rendered), and well inside.
    patch p = string_copy(-9.0, -21.0);
    for (std::size_t b = 4; b < p.noise.size(); ++b) p.noise[b].env.peak = level_db{-95.0};
    const double rate_hz = GENERATE(44100.0, 48000.0);
    const double median_db = median(draw_peaks_db(p, default_output_rate_hz, 1, 9));
    const double offset_db = GENERATE(-0.8, -0.505, -0.495, -0.2, 0.0, 0.3, 0.495, 0.505, 0.8);
    const auto peak_lin = static_cast<float>(std::pow(10.0, (median_db + offset_db) / 20.0));
    const std::vector<float> note = recording(rate_hz, peak_lin);
    const peak_match_result settled = match_copy_peak(p, note, rate_hz, {.settle_by_bound = true});
    const peak_match_result full = match_copy_peak(p, note, rate_hz, {.settle_by_bound = false});
    const double want_db = std::clamp(0.0, offset_db - peak_tolerance_db, offset_db + peak_tolerance_db);
    CAPTURE(rate_hz, median_db, offset_db, settled.expected_gain_db, full.expected_gain_db, want_db);
    CHECK(settled.expected_gain_db == full.expected_gain_db);
    CHECK(settled.gain_db == full.gain_db);
    CHECK(settled.held_down_db == full.held_down_db);
    CHECK(std::abs(full.expected_gain_db - want_db) < 0.001);
}

TEST_CASE("the partials' gain does not follow one noise draw", "[peak_match]") {
    // Disjoint sets of draws give nearly the same gain, where single draws spread by a dB or
    // more: the median of 9 spreads about a third as much (0.52 against 1.56 dB here).
    const patch p = string_copy(-6.0, -18.0);
    const double rate_hz = 44100.0;
    const std::vector<float> note = recording(rate_hz, 0.25f);
    std::vector<double> single_db;
    std::vector<double> median_db;
    for (std::uint64_t set = 0; set < 4; ++set) {
        const std::uint64_t first = 1 + 100 * set;
        median_db.push_back(peak_matching_gain_db(p, note, rate_hz, {.first_seed = first, .draws = 9, .default_seed = first}));
        single_db.push_back(peak_matching_gain_db(p, note, rate_hz, {.first_seed = first, .draws = 1, .default_seed = first}));
    }
    const auto spread = [](const std::vector<double>& v) {
        return *std::max_element(v.begin(), v.end()) - *std::min_element(v.begin(), v.end());
    };
    CAPTURE(single_db, median_db, spread(single_db), spread(median_db));
    CHECK(spread(single_db) > 1.0);
    CHECK(spread(median_db) < 0.5 * spread(single_db));
}

TEST_CASE("where the default draw alone would break full scale, the noise gives way, not the partials",
          "[peak_match]") {
    // A recording at full scale (the target is -0.3 dBFS, the limit -0.1 dBFS), and as the
    // default draw the loudest of 31 others: at the expected peak's gain it would peak over the
    // limit. match_peak lowers the bands and keeps the partials' gain.
    patch p = string_copy(-6.0, -18.0);
    const double rate_hz = 44100.0;
    const std::vector<float> note = recording(rate_hz, 1.0f);
    const std::vector<double> peaks = draw_peaks_db(p, rate_hz, 10, 31);
    const auto loudest = static_cast<std::uint64_t>(std::max_element(peaks.begin(), peaks.end()) - peaks.begin()) + 10;
    const peak_match_params params{.first_seed = 1, .draws = 9, .default_seed = loudest};
    const peak_match_result before = match_copy_peak(p, note, rate_hz, params);
    CAPTURE(peaks, loudest, before.gain_db, before.expected_gain_db, before.held_down_db);
    REQUIRE(before.held_down_db > max_noise_hold_db);  // the case this checks
    const double band_db = p.noise.front().env.peak.db;
    match_peak(p, note, rate_hz, params);
    const double cut_db = band_db - p.noise.front().env.peak.db;
    const double default_db = peak_db(render_patch(p, {.sample_rate_hz = rate_hz, .noise_seed = loudest}));
    const double output_db = peak_db(render_patch(p, {.sample_rate_hz = default_output_rate_hz, .noise_seed = loudest}));
    CAPTURE(p.note.gain_db, cut_db, default_db, output_db);
    CHECK(p.note.gain_db > before.expected_gain_db - max_noise_hold_db - 1e-9);
    CHECK(p.note.gain_db <= before.expected_gain_db + 1e-9);
    CHECK(cut_db >= noise_step_db);
    CHECK(cut_db <= max_noise_cut_db);
    CHECK(default_db <= -default_render_margin_db + 0.01);
    CHECK(output_db <= -default_render_margin_db + 0.01);
}

TEST_CASE("a quiet default draw still peaks within the allowed miss of the recording", "[peak_match]") {
    // The default draw is the quietest of 31 others. The recording peaks 0.4 dB over the draws'
    // median (the expected peak's gain is 0: within the tolerance), or, for a louder copy, at full
    // scale (over the -0.3 dBFS target): either way the default render would peak more than
    // max_default_peak_miss_db under the recording, so the gain rises to that.
    const bool full_scale = GENERATE(false, true);
    const patch p = full_scale ? string_copy(-6.0, -18.0) : string_copy(-9.0, -21.0);
    const double rate_hz = 44100.0;
    const std::vector<double> peaks = draw_peaks_db(p, rate_hz, 10, 31);
    const auto quietest = static_cast<std::uint64_t>(std::min_element(peaks.begin(), peaks.end()) - peaks.begin()) + 10;
    const double quiet_db = *std::min_element(peaks.begin(), peaks.end());
    const double median_db = median(draw_peaks_db(p, default_output_rate_hz, 1, 9));
    const double recording_db = full_scale ? 0.0 : median_db + 0.4;
    const std::vector<float> note = recording(rate_hz, static_cast<float>(std::pow(10.0, recording_db / 20.0)));
    const peak_match_result r = match_copy_peak(p, note, rate_hz, {.first_seed = 1, .draws = 9, .default_seed = quietest});
    patch q = p;
    q.note.gain_db = r.gain_db;
    const double default_db = peak_db(render_patch(q, {.sample_rate_hz = rate_hz, .noise_seed = quietest}));
    CAPTURE(full_scale, median_db, quiet_db, recording_db, r.gain_db, r.expected_gain_db, default_db);
    REQUIRE(quiet_db + r.expected_gain_db < recording_db - max_default_peak_miss_db);  // the case this checks
    CHECK(r.gain_db > r.expected_gain_db);
    CHECK(std::abs(default_db - (recording_db - max_default_peak_miss_db)) < 0.001);
}

TEST_CASE("a stereo copy's gain keeps both channels of its own default render, at 48 kHz and at the source rate, "
          "0.1 dB under full scale at the file's gain step",
          "[peak_match][stereo]") {
    // Two channels drawn with their coherence: the render a stereo patch plays (render_channels),
    // whose peak the per-channel peak matches never rendered.
    patch p = string_copy(-0.5, -30.0);
    p.note.channels = 2;
    p.partials[0].place.pan = 0.5;  // the right channel 1.8 dB over centre: over full scale
    for (noise_band& b : p.noise) b.coherence = 0.5;
    const double source_rate_hz = GENERATE(48000.0, 44100.0, 32000.0);
    const double gain_db = GENERATE(0.0, -3.0);
    p.note.gain_db = gain_db;
    const auto peak_of = [&](const patch& q, double rate_hz) {
        double m = -infinity;
        for (const auto& channel : render_channels(q, {.sample_rate_hz = rate_hz, .noise_seed = peak_match_params{}.default_seed}))
            m = std::max(m, peak_db(channel));
        return m;
    };
    const double before_db = std::max(peak_of(p, 48000.0), peak_of(p, source_rate_hz));
    const double limited_db = render_limited_gain_db(p, source_rate_hz);
    patch q = p;
    q.note.gain_db = limited_db;
    const double after_db = std::max(peak_of(q, 48000.0), peak_of(q, source_rate_hz));
    CAPTURE(source_rate_hz, gain_db, before_db, limited_db, after_db);
    if (before_db <= -default_render_margin_db) {
        CHECK(limited_db == gain_db);  // under the margin: left as it is
    } else {
        CHECK(after_db <= -default_render_margin_db);
        CHECK(after_db > -default_render_margin_db - 0.01 - 1e-3);  // not lower than the 0.01 dB step needs
    }
    CHECK((gain_db == 0.0) == (before_db > -default_render_margin_db));  // the sweep has both cases
}

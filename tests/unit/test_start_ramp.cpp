// The sub-millisecond rise of partials that start at once (analysis/start_ramp.hpp).
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <vector>

#include "analysis/start_ramp.hpp"
#include "core/envelope.hpp"
#include "core/units.hpp"
#include "synthesis/render.hpp"

using Catch::Matchers::WithinAbs;
using namespace wane;

namespace {

constexpr double rate_hz = 48000.0;
constexpr double pi = 3.141592653589793;

/// Three partials in phase at t = 0 (their sum jumps to 0.9 from silence), instant starts, and
/// one with a slow attack that the rise leaves alone.
patch jumping_patch() {
    patch p;
    p.note.f0_hz = 220.0;
    p.note.length_s = 0.2;
    const double freqs[] = {220.0, 440.0, 660.0};
    for (double f : freqs)
        p.partials.push_back({.freq_hz = f, .harmonic = 0, .phase_rad = 0.0,
                              .env = {.attack_s = 0.0, .peak = level_db{20.0 * std::log10(0.3)},
                                      .decay = {{.t60_s = 0.5, .until_s = {}}}}});
    p.partials.push_back({.freq_hz = 1000.0, .harmonic = 0, .phase_rad = 0.0,
                          .env = {.attack_s = 0.02, .peak = level_db{-30.0}, .decay = {{.t60_s = 1.0, .until_s = {}}}}});
    return p;
}

/// The recording of that patch's partials with each instant one rising linearly over rise_s from
/// silence (written out here), after lead samples of silence.
std::vector<float> rising_recording(const patch& p, double rise_s, std::size_t lead, std::size_t count) {
    std::vector<float> x(lead + count, 0.0F);
    for (std::size_t n = 0; n < count; ++n) {
        const double t = static_cast<double>(n) / rate_hz;
        double v = 0.0;
        for (const partial& q : p.partials) {
            double amp = envelope_amp(q.env, t).lin;
            if (q.env.attack_s == 0.0 && t < rise_s) amp *= t / rise_s;
            v += amp * std::cos(2.0 * pi * q.freq_hz * t + q.phase_rad);
        }
        x[lead + n] = static_cast<float>(v);
    }
    return x;
}

/// Largest step over [0, to) from silence before x[0].
double largest_step(const std::vector<double>& x, std::size_t to) {
    double step = std::abs(x[0]);
    for (std::size_t n = 1; n < std::min(to, x.size()); ++n) step = std::max(step, std::abs(x[n] - x[n - 1]));
    return step;
}

}  // namespace

TEST_CASE("the copy's first samples as the rise plays them equal the renderer's", "[start_ramp]") {
    // copy_start against synthesis/render.hpp's damped-phasor kernels, the partials given the rise.
    const patch p = jumping_patch();
    const double rise_s = GENERATE(0.0, 0.0003, 0.001);
    patch ramped = p;
    for (partial& q : ramped.partials) q = with_rise(q, rise_s);
    const std::size_t count = 480;  // 10 ms
    const std::vector<double> mine = copy_start(p, rate_hz, count, rise_s);
    std::vector<float> rendered(count);
    const partial_renderer renderer(ramped, {.sample_rate_hz = rate_hz, .length_s = 0.2, .include_noise = false});
    renderer.render(0, rendered);
    double worst = 0.0;
    for (std::size_t n = 0; n < count; ++n) worst = std::max(worst, std::abs(mine[n] - static_cast<double>(rendered[n])));
    CAPTURE(rise_s, worst);
    CHECK(worst < 1e-4);  // the renderer stores float: a few 1e-7 of full scale per partial
}

TEST_CASE("a copy that jumps where the recording rises gets the shortest rise no steeper than the recording",
          "[start_ramp]") {
    // The recording rises over rise_s (0.3 or 0.6 ms) from silence; the patch starts its partials
    // at once. The rise chosen must be on the 0.1 ms grid, no longer than the recording's own (that
    // one meets the rule: it is the recording), and leave the copy's start no steeper than the
    // recording's steepest step or the copy's own waveform's over the first 2 ms (the rule's
    // after_s); from its end on every envelope is what it was.
    const double true_rise_s = GENERATE(0.0003, 0.0006);
    const patch p = jumping_patch();
    const std::size_t lead = 480;
    const std::vector<float> recording = rising_recording(p, true_rise_s, lead, 4800);
    patch softened = p;
    const start_ramp_result r = soften_start(softened, recording, lead, rate_hz, {});
    CAPTURE(true_rise_s, r.rise_s, r.recording_step, r.copy_step_before, r.copy_step_after);
    CHECK(r.rise_s > 0.0);
    CHECK(r.rise_s <= true_rise_s + 1e-12);
    CHECK_THAT(r.rise_s * 1e4, WithinAbs(std::round(r.rise_s * 1e4), 1e-9));  // on the 0.1 ms grid
    CHECK(r.copy_step_before > r.recording_step);  // the instant start jumps (0.9 from silence)
    double own_step = 0.0;  // the instant copy's own waveform after its first sample, first 2 ms
    const std::vector<double> instant = copy_start(p, rate_hz, 96, 0.0);
    for (std::size_t n = 1; n < 96; ++n) own_step = std::max(own_step, std::abs(instant[n] - instant[n - 1]));
    const std::vector<double> copy = copy_start(softened, rate_hz, 96, 0.0);
    const auto rise_end = static_cast<std::size_t>(std::ceil(r.rise_s * rate_hz)) + 2;
    CAPTURE(own_step, largest_step(copy, rise_end));
    CHECK(largest_step(copy, rise_end) <= std::max(r.recording_step, own_step) * (1.0 + 1e-6));
    for (std::size_t k = 0; k < p.partials.size(); ++k) {
        const envelope& before = p.partials[k].env;
        const envelope& after = softened.partials[k].env;
        INFO("partial " << k);
        if (before.attack_s > 0.0) {
            CHECK(after == before);  // a slow attack is left alone
            continue;
        }
        CHECK(after.attack_s == r.rise_s);
        for (int step = 0; r.rise_s + 0.001 * step < 0.1; ++step) {  // 1 ms steps from the rise's end
            const double t = r.rise_s + 0.001 * step;
            CHECK_THAT(envelope_level(after, t).db, WithinAbs(envelope_level(before, t).db, 1e-9));
        }
    }
}

TEST_CASE("a recording that jumps as the copy does keeps the instant start", "[start_ramp]") {
    // The recording is the patch's own instant start after silence: its first step is the copy's.
    const patch p = jumping_patch();
    const std::size_t lead = 480;
    const std::vector<float> recording = rising_recording(p, 0.0, lead, 4800);
    patch unchanged = p;
    const start_ramp_result r = soften_start(unchanged, recording, lead, rate_hz, {});
    CAPTURE(r.recording_step, r.copy_step_before);
    CHECK(r.rise_s == 0.0);
    CHECK(unchanged == p);
}

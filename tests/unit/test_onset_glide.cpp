// The onset glide fit (analysis/onset_glide.hpp) on synthetic notes with exact truth: partials
// whose pitch glides are made here from the glide's definition (the phase by numerical integration
// of f 2^(c(t)/1200), not by core/glide's closed form), with seeded white noise.
#include <catch2/catch.hpp>

#include <cmath>
#include <complex>
#include <span>
#include <vector>

#include "analysis/analyze.hpp"
#include "analysis/glide_projection.hpp"
#include "analysis/onset_glide.hpp"
#include "core/patch.hpp"
#include "synthesis/render.hpp"
#include "test_signals.hpp"

using namespace wane;

namespace {

struct true_partial {
    double freq_hz;
    double amp_lin;
    double t60_s;
    double phase_rad;   ///< at t = 0
    double cents;       ///< glide at t = 0 (0: none)
    double glide_s;
    double glide_from_s = 0.0;  ///< the glide starts here (the partial holds f before it)
};

/// sum_k a_k 10^(-3 t / T60_k) cos(2 pi f_k t + phi_k + 2 pi f_k I_k(t)) + noise; I_k(t) =
/// int_0^t (2^(c_k e^(-(s - d_k)/tau_k) / 1200) - 1) ds (0 for s < d_k, d_k = glide_from_s) by
/// Simpson's rule per sample interval.
std::vector<float> gliding_note(const std::vector<true_partial>& parts, double rate_hz, double length_s,
                                double noise_rms, std::uint64_t seed) {
    const auto frames = static_cast<std::size_t>(length_s * rate_hz);
    std::vector<double> y(frames, 0.0);
    const double h = 1.0 / rate_hz;
    for (const true_partial& q : parts) {
        const auto g = [&](double s) {
            if (q.cents == 0.0 || s < q.glide_from_s) return 0.0;
            return std::exp2(q.cents * std::exp(-(s - q.glide_from_s) / q.glide_s) / 1200.0) - 1.0;
        };
        double integral_s = 0.0;
        for (std::size_t n = 0; n < frames; ++n) {
            const double t = static_cast<double>(n) * h;
            if (n > 0) integral_s += h / 6.0 * (g(t - h) + 4.0 * g(t - 0.5 * h) + g(t));
            y[n] += q.amp_lin * std::pow(10.0, -3.0 * t / q.t60_s) *
                    std::cos(2.0 * M_PI * std::fmod(q.freq_hz * t, 1.0) + q.phase_rad + 2.0 * M_PI * q.freq_hz * integral_s);
        }
    }
    splitmix64 rng{seed};
    std::vector<float> out(frames);
    for (std::size_t n = 0; n < frames; ++n) out[n] = static_cast<float>(y[n] + noise_rms * rng.gaussian());
    return out;
}

/// The patch an analysis would hand the stage: each partial at its long-term frequency, its decay,
/// its level at the start and the phase its late part shows (the settled phase, 2 pi f I(inf) on).
patch patch_of(const std::vector<true_partial>& parts) {
    patch p;
    p.note.length_s = 1.0;
    p.note.f0_hz = parts.front().freq_hz;
    for (const true_partial& q : parts) {
        const double settled = q.phase_rad + (q.cents == 0.0 ? 0.0 : 2.0 * M_PI * q.freq_hz * q.glide_s * (std::log(2.0) * q.cents / 1200.0));
        p.partials.push_back({.freq_hz = q.freq_hz, .harmonic = 0, .phase_rad = std::remainder(settled, 2.0 * M_PI),
                              .env = {.attack_s = 0.0, .peak = to_level(amp_lin{q.amp_lin}), .decay = {{.t60_s = q.t60_s}}},
                              .place = {}});
    }
    return p;
}

/// Where x is heard over [0.1, 1.1] s: the peak of its Hann-windowed spectrum within +-3 Hz of
/// near_hz, by the DTFT summed sample by sample (a scan in 0.05 Hz steps, then golden-section
/// search to 1e-5 Hz): the measure of tests/cli/pitch_check.py without its FFT grid.
double heard_peak_hz(std::span<const float> x, double rate_hz, double near_hz) {
    const auto first = static_cast<std::size_t>(0.1 * rate_hz);
    const auto count = static_cast<std::size_t>(1.0 * rate_hz);
    const auto power = [&](double nu_hz) {
        std::complex<double> sum{};
        for (std::size_t n = 0; n < count; ++n) {
            const double w = 0.5 - 0.5 * std::cos(2.0 * M_PI * static_cast<double>(n) / static_cast<double>(count - 1));
            sum += w * static_cast<double>(x[first + n]) * std::polar(1.0, -2.0 * M_PI * std::fmod(nu_hz * static_cast<double>(n) / rate_hz, 1.0));
        }
        return std::norm(sum);
    };
    double best_hz = near_hz;
    double best = power(near_hz);
    for (int i = -60; i <= 60; ++i) {
        const double nu = near_hz + 0.05 * i;
        const double pw = power(nu);
        if (pw > best) {
            best = pw;
            best_hz = nu;
        }
    }
    const double g = 0.5 * (std::sqrt(5.0) - 1.0);
    double a = best_hz - 0.05;
    double c = best_hz + 0.05;
    while (c - a > 1e-5) {
        const double x1 = c - g * (c - a);
        const double x2 = a + g * (c - a);
        if (power(x1) > power(x2)) {
            c = x2;
        } else {
            a = x1;
        }
    }
    return 0.5 * (a + c);
}

/// p's partial k alone over length_s, as the renderer plays it.
std::vector<float> render_one(const patch& p, std::size_t k, double rate_hz, double length_s) {
    patch one = p;
    one.partials = {p.partials[k]};
    one.note.length_s = length_s + 0.1;
    const partial_renderer r(one, {.sample_rate_hz = rate_hz, .include_noise = false});
    std::vector<float> y(static_cast<std::size_t>(length_s * rate_hz));
    r.render(0, y);
    return y;
}

/// A note of parts (noise at noise_lin, seed) whose first partial the patch holds where the long
/// spectrum hears that partial alone (0.1-1.1 s), as the analysis hands it on; fitted with params.
struct heard_glide_fit {
    double heard_hz = 0.0;         ///< where the recording's partial is heard
    patch p;                       ///< after fit_onset_glides
    onset_glide_summary summary;
    double copy_heard_hz = 0.0;    ///< where the copy's first partial is heard
};

heard_glide_fit fit_heard_glide(const std::vector<true_partial>& parts, double rate_hz, double length_s,
                                std::uint64_t seed, const onset_glide_params& params) {
    heard_glide_fit r;
    r.heard_hz = heard_peak_hz(gliding_note({parts[0]}, rate_hz, length_s, 0.0, 1), rate_hz, parts[0].freq_hz);
    const std::vector<float> x = gliding_note(parts, rate_hz, length_s, 1e-4, seed);
    r.p = patch_of(parts);
    r.p.note.length_s = length_s;
    r.p.partials[0].freq_hz = r.heard_hz;
    r.summary = fit_onset_glides(r.p, x, rate_hz, params);
    r.copy_heard_hz = heard_peak_hz(render_one(r.p, 0, rate_hz, length_s), rate_hz, r.heard_hz);
    return r;
}

double cents_apart(double a_hz, double b_hz) { return 1200.0 * std::log2(a_hz / b_hz); }

}  // namespace

TEST_CASE("the onset glide fit finds a known glide within 3 cents and 25% of its time constant", "[analysis][glide]") {
    const double rate_hz = 48000.0;
    const double cents = GENERATE(40.0, -30.0, 15.0);
    const double glide_s = GENERATE(0.03, 0.06);
    const std::vector<true_partial> parts = {
        {.freq_hz = 392.0, .amp_lin = 0.3, .t60_s = 2.0, .phase_rad = 0.4, .cents = cents, .glide_s = glide_s},
        {.freq_hz = 785.5, .amp_lin = 0.2, .t60_s = 1.5, .phase_rad = -1.1, .cents = 0.0, .glide_s = 0.0},
        {.freq_hz = 1183.0, .amp_lin = 0.1, .t60_s = 1.0, .phase_rad = 2.0, .cents = 0.0, .glide_s = 0.0},
    };
    const std::vector<float> x = gliding_note(parts, rate_hz, 0.5, 1e-3, 7);
    patch p = patch_of(parts);
    const onset_glide_summary s = fit_onset_glides(p, x, rate_hz, {});
    const partial& g = p.partials[0];
    CAPTURE(cents, glide_s, g.glide_cents, g.glide_s, g.phase_rad, s.glides, s.residual_before_db, s.residual_after_db);
    CHECK(s.glides == 1);
    CHECK(std::abs(g.glide_cents - cents) <= 3.0);
    CHECK(std::abs(g.glide_s / glide_s - 1.0) <= 0.25);
    // Its phase at t = 0 and its level come out right: within 0.1 rad and 0.5 dB.
    CHECK(std::abs(std::remainder(g.phase_rad - 0.4, 2.0 * M_PI)) <= 0.1);
    CHECK(std::abs(g.env.peak.db - to_level(amp_lin{0.3}).db) <= 0.5);
    CHECK(p.partials[1].glide_cents == 0.0);
    CHECK(p.partials[2].glide_cents == 0.0);
    CHECK(s.residual_after_db < s.residual_before_db - 10.0);
}

TEST_CASE("a note without glides gets none", "[analysis][glide]") {
    const double rate_hz = GENERATE(44100.0, 48000.0);
    const std::uint64_t seed = GENERATE(1, 2, 3);
    std::vector<true_partial> parts;
    for (int k = 1; k <= 6; ++k) {
        parts.push_back({.freq_hz = 196.0 * k * std::sqrt(1.0 + 1e-4 * k * k), .amp_lin = 0.3 / k, .t60_s = 3.0 / k,
                         .phase_rad = 0.7 * k, .cents = 0.0, .glide_s = 0.0});
    }
    const std::vector<float> x = gliding_note(parts, rate_hz, 0.5, 3e-3, seed);
    patch p = patch_of(parts);
    const patch before = p;
    const onset_glide_summary s = fit_onset_glides(p, x, rate_hz, {});
    CAPTURE(rate_hz, seed, s.glides);
    CHECK(s.glides == 0);
    CHECK(p == before);
}

TEST_CASE("a short-lived mode gets a slow glide (time constant past 0.25 s), a lasting partial does not", "[analysis][glide]") {
    // A mode that dies within the span plays off the frequency it is given: a glide slower than
    // the span is that frequency. A lasting partial with the same glide is left as it is: a glide
    // that slow would move the pitch its long part is heard at.
    const double rate_hz = 44100.0;
    const double glide_s = GENERATE(0.4, 0.6);
    const double cents = GENERATE(30.0, -40.0);
    const double t60_s = GENERATE(0.12, 3.0);
    const std::vector<true_partial> parts = {
        {.freq_hz = 1523.0, .amp_lin = 0.3, .t60_s = t60_s, .phase_rad = -0.6, .cents = cents, .glide_s = glide_s},
        {.freq_hz = 523.0, .amp_lin = 0.15, .t60_s = 2.0, .phase_rad = 1.3, .cents = 0.0, .glide_s = 0.0},
    };
    const std::vector<float> x = gliding_note(parts, rate_hz, 0.5, 1e-3, 11);
    patch p = patch_of(parts);
    const onset_glide_summary s = fit_onset_glides(p, x, rate_hz, {});
    const partial& g = p.partials[0];
    CAPTURE(cents, glide_s, t60_s, g.glide_cents, g.glide_s, g.phase_rad, s.glides, s.residual_before_db, s.residual_after_db);
    if (t60_s > 1.0) {
        CHECK(g.glide_s <= onset_glide_params{}.max_fit_glide_s * std::sqrt(2.0));  // the fine grid's reach
        return;
    }
    CHECK(s.glides == 1);
    // A slow glide over a mode that lasts ~0.1 s is nearly a straight line in cents: the time
    // constant is told within a factor of 2 and the offset at 20 ms (where the mode is loud)
    // within 1 cent.
    CHECK(g.glide_s / glide_s >= 0.5);
    CHECK(g.glide_s / glide_s <= 2.0);
    const auto early_cents = [](double c0, double tau) { return c0 * std::exp(-0.02 / tau); };
    CHECK(std::abs(early_cents(g.glide_cents, g.glide_s) - early_cents(cents, glide_s)) <= 1.0);
    CHECK(s.residual_after_db < s.residual_before_db - 10.0);
}

TEST_CASE("past the 8 strongest starts, a short-lived mode's glide is fitted and a lasting partial's is not", "[analysis][glide]") {
    // Eight harmonics that hold their pitch (0 to -3.5 dB at the start, T60 2 s), then, weaker at
    // the start, a mode of T60 0.3 s that plays 40 cents sharp of its long-term frequency and
    // settles slowly, and a lasting partial (T60 2 s) with a glide as strong.
    const double rate_hz = 48000.0;
    const double cents = GENERATE(40.0, -30.0);
    std::vector<true_partial> parts;
    for (int k = 1; k <= 8; ++k) {
        parts.push_back({.freq_hz = 220.0 * k, .amp_lin = 0.3 * std::pow(10.0, -0.5 * (k - 1) / 20.0), .t60_s = 2.0,
                         .phase_rad = 0.5 * k, .cents = 0.0, .glide_s = 0.0});
    }
    const double weaker_lin = 0.3 * std::pow(10.0, -4.0 / 20.0);
    parts.push_back({.freq_hz = 1650.0, .amp_lin = weaker_lin, .t60_s = 0.3, .phase_rad = 1.0, .cents = cents, .glide_s = 0.5});
    parts.push_back({.freq_hz = 2090.0, .amp_lin = weaker_lin, .t60_s = 2.0, .phase_rad = -1.0, .cents = cents, .glide_s = 0.05});
    const std::vector<float> x = gliding_note(parts, rate_hz, 0.5, 1e-4, 5);
    patch p = patch_of(parts);
    const onset_glide_summary s = fit_onset_glides(p, x, rate_hz, {.max_partials = 8});
    const partial& brief = p.partials[8];
    CAPTURE(cents, s.glides, s.residual_before_db, s.residual_after_db, brief.glide_cents, brief.glide_s);
    CHECK(s.glides == 1);
    for (std::size_t k = 0; k < 8; ++k) CHECK(p.partials[k].glide_cents == 0.0);
    CHECK(p.partials[9].glide_cents == 0.0);
    // The mode's offset at 20 ms (where it is loud) within 1 cent.
    const auto early_cents = [](double c0, double tau) { return c0 * std::exp(-0.02 / tau); };
    CHECK(std::abs(early_cents(brief.glide_cents, brief.glide_s) - early_cents(cents, 0.5)) <= 1.0);
}

TEST_CASE("a glide that would spoil the copy's first 10 ms, exact there, is not kept", "[analysis][glide]") {
    // The partial holds its frequency for 10 ms, where the patch plays it exactly (its phase at
    // the start), then glides 40 cents: a glide from t = 0 explains the rest of the span but moves
    // the copy's first 10 ms off the recording. Allowed any early rise, the fit keeps that glide
    // (the rule is what drops it). The rule asked of every partial here (by default it spares the
    // 8 strongest).
    const double rate_hz = 48000.0;
    const double cents = GENERATE(40.0, -40.0);
    const std::vector<true_partial> parts = {
        {.freq_hz = 1210.0, .amp_lin = 0.3, .t60_s = 2.0, .phase_rad = 0.8, .cents = cents, .glide_s = 0.03,
         .glide_from_s = 0.01},
        {.freq_hz = 605.0, .amp_lin = 0.2, .t60_s = 2.0, .phase_rad = -0.3, .cents = 0.0, .glide_s = 0.0},
    };
    const std::vector<float> x = gliding_note(parts, rate_hz, 0.5, 1e-5, 3);
    patch p = patch_of(parts);
    p.partials[0].phase_rad = parts[0].phase_rad;  // exact over the first 10 ms
    const patch before = p;
    patch any_rise = p;
    const onset_glide_summary allowed =
        fit_onset_glides(any_rise, x, rate_hz, {.max_early_rise = 1e12, .early_checked_after = 0});
    const onset_glide_summary s = fit_onset_glides(p, x, rate_hz, {.early_checked_after = 0});
    CAPTURE(cents, allowed.glides, any_rise.partials[0].glide_cents, s.glides, p.partials[0].glide_cents);
    CHECK(allowed.glides == 1);
    CHECK(s.glides == 0);
    CHECK(p == before);
}

TEST_CASE("a glide candidate the bounds stop early explains less than its floor, and one they sum gives the whole sum",
          "[analysis][glide]") {
    // analysis/glide_projection: evaluate_above, with and without the settled bound (decay tails),
    // against evaluate (every block summed) on a gliding partial with noise and on noise alone, at
    // every point of a grid and floors from 0.3 to 1.2 times the no-glide fit's: a stopped
    // candidate's whole-sum E is under the floor, a summed one is the same number, and the lazily
    // made terms give the same numbers as whole ones.
    using namespace glide_projection;
    const double rate_hz = 48000.0;
    const auto count = static_cast<std::size_t>(0.15 * rate_hz);
    const std::size_t block = 48;
    int stopped = 0, summed = 0, stopped_settled = 0;
    for (const double noise_rms : {0.02, 1.0}) {
        const std::vector<float> note = gliding_note({{.freq_hz = 523.0, .amp_lin = noise_rms < 1.0 ? 0.5 : 0.0, .t60_s = 2.0,
                                                      .phase_rad = 0.3, .cents = 30.0, .glide_s = 0.02}},
                                                     rate_hz, 0.15, noise_rms, 77);
        const std::vector<double> y(note.begin(), note.begin() + static_cast<std::ptrdiff_t>(count));
        const heterodyned z = heterodyne(y, 523.0, rate_hz);
        const block_sums fine = sum_flat(z, rate_hz, block);
        const block_sums coarse = merged_pairs(fine, rate_hz);
        const double none = evaluate(fine, 523.0, 0.0, 0.0, rate_hz).explained;
        for (const block_sums* s : {&fine, &coarse}) {
            for (const double glide_s : {0.005, 0.02, 0.1, 0.5}) {
                const std::vector<double> decay = decays(*s, glide_s);
                const decay_tails tails = tails_at(*s, decay);
                for (int step = -12; step <= 12; ++step) {
                    if (step == 0) continue;
                    const double cents = 4.0 * step;
                    glide_terms whole = terms_at(cents, glide_s, decay);
                    const double want = evaluate(*s, 523.0, whole, rate_hz).explained;
                    for (const double share : {0.3, 0.9, 1.0, 1.2}) for (const decay_tails* settled : {static_cast<const decay_tails*>(nullptr), &tails}) {
                        glide_terms lazy{.cents = cents, .glide_s = glide_s, .whole_rad_per_hz = whole.whole_rad_per_hz,
                                         .remaining_rad_per_hz = std::vector<double>(decay.size()),
                                         .excess = std::vector<double>(decay.size()), .decay = decay, .filled = 0};
                        const auto got = evaluate_above(*s, 523.0, lazy, rate_hz, share * none, settled);
                        INFO("noise " << noise_rms << ", blocks " << s->z.size() << ", cents " << cents << ", tau " << glide_s
                                      << ", floor " << share * none << ", whole-sum E " << want << ", settled bound " << (settled != nullptr));
                        if (got) {
                            CHECK(got->explained == want);
                            ++summed;
                        } else {
                            CHECK(want < share * none);
                            ++(settled ? stopped_settled : stopped);
                        }
                    }
                }
            }
        }
    }
    INFO("stopped " << stopped << " (with the settled bound " << stopped_settled << "), summed " << summed);
    CHECK(stopped > 100);
    CHECK(stopped_settled > stopped);  // the settled bound stops candidates the first one sums
    CHECK(summed > 100);
}

TEST_CASE("a large slow glide of a lasting partial is fitted, and the copy is heard where the recording is",
          "[analysis][glide]") {
    // A low string's second harmonic that starts over 100 cents sharp and settles over 0.1-0.2 s
    // (pizzicato_c2's plays 133-136 Hz over its first 0.25 s, then 129.5 Hz). The patch holds the
    // partial where the recording's long spectrum hears it (0.1-1.1 s: the glide's tail pulls it
    // off the settled frequency), as the analysis measures it. The fit must find the glide (past
    // the first 96 cents of the grid) and keep the copy's peak over that span at that frequency
    // (within 0.1 cent; the pitch check's tolerance is 1 cent). Over the 150 ms span offset and
    // time constant trade against each other (130 cents at 0.12 s came out 136 at 0.111 s: 1-2
    // cents apart over 30-150 ms, 6 at the start), and the settled frequency follows from the
    // fitted tail: within 3.5 cents of the truth's, the copy's frequency within 6 cents of the
    // truth's at 20-100 ms (without a glide it is 80-110 cents off there), and the copy's residual
    // over the span 10 dB down.
    const double rate_hz = 48000.0;
    const double cents = GENERATE(130.0, -120.0);
    const double glide_s = GENERATE(0.12, 0.2);
    const double f_hz = 130.0;
    const std::vector<true_partial> parts = {
        {.freq_hz = f_hz, .amp_lin = 0.3, .t60_s = 3.0, .phase_rad = 0.4, .cents = cents, .glide_s = glide_s},
        {.freq_hz = 523.0, .amp_lin = 0.15, .t60_s = 2.0, .phase_rad = -1.1, .cents = 0.0, .glide_s = 0.0},
    };
    const auto [heard_hz, p, s, copy_heard_hz] = fit_heard_glide(parts, rate_hz, 1.2, 13, {});
    const partial& g = p.partials[0];
    CAPTURE(cents, glide_s, heard_hz, s.glides, g.freq_hz, g.glide_cents, g.glide_s, copy_heard_hz);
    CHECK(s.glides == 1);
    CHECK(std::abs(cents_apart(copy_heard_hz, heard_hz)) <= 0.1);
    CHECK(std::abs(cents_apart(g.freq_hz, f_hz)) <= 3.5);
    for (const double t : {0.02, 0.05, 0.1}) {
        const double copy_hz = g.freq_hz * std::exp2(g.glide_cents * std::exp(-t / g.glide_s) / 1200.0);
        const double truth_hz = f_hz * std::exp2(cents * std::exp(-t / glide_s) / 1200.0);
        CAPTURE(t, copy_hz, truth_hz);
        CHECK(std::abs(cents_apart(copy_hz, truth_hz)) <= 6.0);
    }
    CHECK(s.residual_after_db < s.residual_before_db - 10.0);
}

TEST_CASE("the slow-glide pass fits a small glide of a lasting low partial over 0.3 s, and the copy is heard where the recording is",
          "[analysis][glide]") {
    // A low string's partial that starts 18-20 cents off and settles over 0.15-0.25 s (the
    // strongest partials of a held-out acoustic bass run 10-15 cents sharp of their copy over
    // 0.05-0.3 s), beside a steady one. The patch holds the partial where the long spectrum hears
    // it (0.1-1.1 s) with its settled phase, as the analysis hands it on. The second pass
    // (analysis_params::slow_glides) must give it a glide that keeps the copy's frequency within
    // 1.5 cents of the truth's over 0.02-0.3 s, the copy heard within 0.1 cent of where the
    // recording is, and the residual over the pass's span 10 dB down; the steady partial keeps none.
    const double rate_hz = 44100.0;
    const double cents = GENERATE(20.0, -18.0);
    const double glide_s = GENERATE(0.15, 0.25);
    const double f_hz = 87.3;
    const std::vector<true_partial> parts = {
        {.freq_hz = f_hz, .amp_lin = 0.3, .t60_s = 4.0, .phase_rad = 0.9, .cents = cents, .glide_s = glide_s},
        {.freq_hz = 131.0, .amp_lin = 0.2, .t60_s = 3.0, .phase_rad = -0.4, .cents = 0.0, .glide_s = 0.0},
    };
    const auto [heard_hz, p, s, copy_heard_hz] = fit_heard_glide(parts, rate_hz, 1.2, 17, analysis_params{}.slow_glides);
    const partial& g = p.partials[0];
    CAPTURE(cents, glide_s, heard_hz, s.glides, g.freq_hz, g.glide_cents, g.glide_s, copy_heard_hz,
            s.residual_before_db, s.residual_after_db);
    CHECK(s.glides == 1);
    CHECK(p.partials[1].glide_cents == 0.0);
    CHECK(std::abs(cents_apart(copy_heard_hz, heard_hz)) <= 0.1);
    for (const double t : {0.02, 0.05, 0.1, 0.2, 0.3}) {
        const double copy_hz = g.freq_hz * std::exp2(g.glide_cents * std::exp(-t / g.glide_s) / 1200.0);
        const double truth_hz = f_hz * std::exp2(cents * std::exp(-t / glide_s) / 1200.0);
        CAPTURE(t, copy_hz, truth_hz);
        CHECK(std::abs(cents_apart(copy_hz, truth_hz)) <= 1.5);
    }
    CHECK(s.residual_after_db < s.residual_before_db - 10.0);
}

TEST_CASE("the slow-glide pass fits a glide of 1.5-3 cents, under the first pass's 4-cent floor, and the copy follows the partial over 0.4 s",
          "[analysis][glide]") {
    // A string's partial that plays a few cents sharp (or flat) and settles over 0.2-0.3 s, beside
    // a steady one: held-out harp_cs4's, piano_as3's and picked_bass_e2's strongest partials run
    // 1-3 cents sharp over their first 0.1-0.4 s and end 10-30 degrees ahead of a copy held at the
    // heard frequency. The patch holds the partial where the long spectrum hears it with its
    // settled phase. The second pass (analysis_params::slow_glides) must give it a glide, leave
    // the steady one without, keep the copy heard within 0.1 cent of the recording, and make the
    // copy's partial match the true one over 0-0.4 s (noise-free, each alone) to 20 dB: held at
    // the heard frequency it is off by up to half a radian early (5-14 dB; captured as held_db).
    const double rate_hz = 44100.0;
    const double cents = GENERATE(2.5, -2.0, 1.5);
    const double glide_s = GENERATE(0.2, 0.3);
    const std::vector<true_partial> parts = {
        {.freq_hz = 277.2, .amp_lin = 0.3, .t60_s = 3.0, .phase_rad = 0.7, .cents = cents, .glide_s = glide_s},
        {.freq_hz = 415.3, .amp_lin = 0.15, .t60_s = 2.5, .phase_rad = -0.3, .cents = 0.0, .glide_s = 0.0},
    };
    const auto [heard_hz, p, s, copy_heard_hz] = fit_heard_glide(parts, rate_hz, 1.2, 19, analysis_params{}.slow_glides);
    const double span_s = 0.4;
    const std::vector<float> truth = gliding_note({parts[0]}, rate_hz, span_s, 0.0, 1);
    const auto match_db = [&](const patch& q) {
        const std::vector<float> copy = render_one(q, 0, rate_hz, span_s);
        double signal = 0.0;
        double error = 0.0;
        for (std::size_t n = 0; n < truth.size(); ++n) {
            signal += double(truth[n]) * double(truth[n]);
            error += (double(truth[n]) - double(copy[n])) * (double(truth[n]) - double(copy[n]));
        }
        return 10.0 * std::log10(signal / error);
    };
    patch held = patch_of(parts);
    held.note.length_s = 1.2;
    held.partials[0].freq_hz = heard_hz;
    const double held_db = match_db(held);
    const partial& g = p.partials[0];
    CAPTURE(cents, glide_s, heard_hz, s.glides, g.freq_hz, g.glide_cents, g.glide_s, copy_heard_hz, held_db, match_db(p));
    CHECK(s.glides == 1);
    CHECK(p.partials[1].glide_cents == 0.0);
    CHECK(std::abs(cents_apart(copy_heard_hz, heard_hz)) <= 0.1);
    CHECK(match_db(p) >= 20.0);
}

// A partial's pitch glide (core/glide.hpp, patch keys glide_cents and glide_s, format version 4):
// the renderer against the glide's definition evaluated here independently (the phase by
// numerical integration of the instantaneous frequency f 2^(c(t)/1200), not by the closed form),
// the keys' round trip, the older versions still read, bad values refused with file, line and key,
// and the transforms that must keep or mix the glide.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

#include "core/glide.hpp"
#include "core/patch.hpp"
#include "io/patch_toml.hpp"
#include "patch_text.hpp"
#include "synthesis/render.hpp"
#include "transform/blend.hpp"
#include "transform/transform.hpp"

using Catch::Matchers::Contains;
using Catch::Matchers::StartsWith;
using namespace wane;
using wane::test::with;

namespace {

/// One partial, peak -6 dB, an instant start and one decay of T60 = 3 s, gliding.
patch gliding_patch(double freq_hz, double cents, double glide_s, double length_s) {
    patch p;
    p.note.f0_hz = freq_hz;
    p.note.length_s = length_s;
    p.partials.push_back({.freq_hz = freq_hz, .harmonic = 1, .phase_rad = 0.7,
                          .env = {.attack_s = 0.0, .peak = level_db{-6.0}, .decay = {{.t60_s = 3.0}}},
                          .place = {}, .glide_cents = cents, .glide_s = glide_s});
    return p;
}

/// The partial of gliding_patch from the definition, in double: amplitude 10^((-6 - 60 t / 3) / 20)
/// times cos(phase + 2 pi f t + 2 pi f I(t)), I(t) = int_0^t (2^(c0 e^(-s/tau) / 1200) - 1) ds by
/// Simpson's rule on each sample interval (two halves), summed from t = 0; the end fade as
/// render.hpp states it. Simpson's error per interval is h^5 max|g''''| / 2880 with h = 1 / rate:
/// under 1e-20 s here, so the phase is exact to double rounding over the render.
std::vector<double> direct_glide(const patch& p, double rate_hz) {
    const partial& q = p.partials[0];
    const double x0_per_cent = std::log(2.0) / 1200.0;
    const auto g = [&](double s) { return std::exp(x0_per_cent * q.glide_cents * std::exp(-s / q.glide_s)) - 1.0; };
    const auto frames = static_cast<std::size_t>(std::llround(p.note.length_s * rate_hz));
    std::vector<double> y(frames);
    double integral_s = 0.0;
    const double h = 1.0 / rate_hz;
    for (std::size_t n = 0; n < frames; ++n) {
        const double t = static_cast<double>(n) / rate_hz;
        if (n > 0) {
            const double a = static_cast<double>(n - 1) / rate_hz;
            integral_s += h / 6.0 * (g(a) + 4.0 * g(a + 0.5 * h) + g(t));
        }
        const double amp = std::pow(10.0, (-6.0 - 60.0 * t / 3.0) / 20.0);
        const double cycles = std::fmod(q.freq_hz * t, 1.0);
        y[n] = amp * std::cos(2.0 * M_PI * cycles + q.phase_rad + 2.0 * M_PI * q.freq_hz * integral_s) *
               end_fade_gain(n, frames, rate_hz);
    }
    return y;
}

double max_abs_difference(const std::vector<float>& a, const std::vector<double>& b) {
    double worst = 0.0;
    for (std::size_t n = 0; n < a.size(); ++n) worst = std::max(worst, std::abs(static_cast<double>(a[n]) - b[n]));
    return worst;
}

constexpr const char* glide_text = R"(format = "wane-patch"
version = 4

[note]
name = "glide"
f0_hz = 220.0
length_s = 1.0

[[partial]]
freq_hz = 220.0
harmonic = 1
phase_rad = 0.5
glide_cents = 40.0
glide_s = 0.03
peak_db = -12.0
decay = [ { t60_s = 2.0 } ]

[[partial]]
freq_hz = 440.0
harmonic = 2
phase_rad = -0.5
peak_db = -18.0
decay = [ { t60_s = 1.5 } ]
)";

/// Expects the text refused with "glide.toml:LINE:" of the line holding `line_of`, and key and words.
void expect_error(const std::string& text, const std::string& line_of, const std::string& key, const std::string& words) {
    const std::string msg = test::error_of(text, "glide.toml");
    const std::size_t at = text.find(line_of);
    REQUIRE(at != std::string::npos);
    const std::string tag = "glide.toml:" +
                            std::to_string(std::count(text.begin(), text.begin() + static_cast<long>(at), '\n') + 1) + ":";
    INFO("message: " << msg);
    CAPTURE(tag, key, words);
    CHECK_THAT(msg, StartsWith(tag));
    CHECK_THAT(msg, Contains(key));
    CHECK_THAT(msg, Contains(words));
}

}  // namespace

TEST_CASE("a gliding partial renders as the glide's definition within 2e-6 of full scale", "[render][glide]") {
    const double rate_hz = 48000.0;
    const double cents = GENERATE(-80.0, -5.0, 40.0, 300.0, 1200.0);
    const double glide_s = GENERATE(0.002, 0.03, 0.4);
    const double freq_hz = GENERATE(523.25, 3000.0);
    const patch p = gliding_patch(freq_hz, cents, glide_s, 1.0);
    const std::vector<float> y = render_patch(p, {.sample_rate_hz = rate_hz, .include_noise = false});
    const std::vector<double> ref = direct_glide(p, rate_hz);
    REQUIRE(y.size() == ref.size());
    // The budget: float output (6e-8 of the -6 dB peak) on the exact stretch; the phasor lanes'
    // -108 dB worst case (3.8e-6 relative, 1.9e-6 of full scale at -6 dB) plus the hand-over's
    // 1e-6 rad (5e-7 of full scale) after it.
    const double worst = max_abs_difference(y, ref);
    const double settled_s = glide_settled_s(freq_hz, cents, glide_s);
    // The gliding frames alone (before the hand-over), where the renderer evaluates the formula in
    // double: the float output's rounding (half an ulp, under 3e-8 at the -6 dB peak) and 2e-8 for
    // the double rounding, the renderer's (synthesis/render.cpp: its walked decay factors put R off
    // by under 3e-13 |R|, here |R| <= 2 pi 3 kHz 0.4 s Ein(ln 2), 2e-9 rad) and the reference's
    // summed integral. Measured: at most 2.95e-8 over this sweep.
    const auto gliding = std::min(y.size(), static_cast<std::size_t>(std::ceil(settled_s * rate_hz)));
    double worst_gliding = 0.0;
    for (std::size_t n = 0; n < gliding; ++n)
        worst_gliding = std::max(worst_gliding, std::abs(static_cast<double>(y[n]) - ref[n]));
    CAPTURE(cents, glide_s, freq_hz, worst, settled_s, gliding, worst_gliding);
    CHECK(worst_gliding <= 5e-8);
    CHECK(worst <= 2e-6);
    // The glide matters: the same partial without it differs by far more than the tolerance.
    patch still = p;
    still.partials[0].glide_cents = 0.0;
    still.partials[0].glide_s = 0.0;
    const std::vector<float> y0 = render_patch(still, {.sample_rate_hz = rate_hz, .include_noise = false});
    double apart = 0.0;
    for (std::size_t n = 0; n < y.size(); ++n) apart = std::max(apart, std::abs(static_cast<double>(y[n] - y0[n])));
    CAPTURE(apart);
    CHECK(apart >= 1e-3);
}

TEST_CASE("a glide at the keys' limits renders within float rounding and 1e-7 rad of its closed form in long double", "[render][glide]") {
    // An octave's offset and the longest time constant on a high partial: |R| near 1e5 rad, where
    // the renderer's walked decay factors (relative error under 2.3e-13 between its anchors) count
    // most. The reference: theta = phase + 2 pi f t + G - R(t), R = 2 pi f tau Ein(x0 e^(-t/tau)),
    // Ein's series to 40 terms, all in long double (64-bit significand), evaluated here.
    const double cents = GENERATE(1200.0, -1200.0);
    const double freq_hz = 10000.0;
    const double glide_s = max_glide_s;
    const double rate_hz = 48000.0;
    const patch p = gliding_patch(freq_hz, cents, glide_s, 0.2);
    const std::vector<float> y = render_patch(p, {.sample_rate_hz = rate_hz, .include_noise = false});
    const long double x0 = static_cast<long double>(cents) * std::log(2.0L) / 1200.0L;
    const auto ein = [](long double x) {
        long double sum = 0.0L, power = 1.0L, factorial = 1.0L;
        for (int k = 1; k <= 40; ++k) {
            power *= x;
            factorial *= k;
            sum += power / (k * factorial);
        }
        return sum;
    };
    const long double two_pi_l = 2.0L * std::acos(-1.0L);
    const long double f = freq_hz, tau = glide_s;
    const long double whole = two_pi_l * f * tau * ein(x0);
    double worst = 0.0;
    for (std::size_t n = 0; n + static_cast<std::size_t>(end_fade_s * rate_hz) + 1 < y.size(); ++n) {
        const long double t = static_cast<long double>(n) / rate_hz;
        const long double theta = 0.7L + two_pi_l * f * t + whole - two_pi_l * f * tau * ein(x0 * std::exp(-t / tau));
        const long double amp = std::pow(10.0L, (-6.0L - 60.0L * t / 3.0L) / 20.0L);
        worst = std::max(worst, static_cast<double>(std::abs(static_cast<long double>(y[n]) - amp * std::cos(theta))));
    }
    CAPTURE(cents, worst, whole);
    CHECK(std::abs(whole) > 5e4);
    // Half an ulp of the float output at the -6 dB peak (3e-8) and 1e-7 rad at that amplitude (5e-8).
    // Measured: 1.6e-8 either way (the float output's rounding).
    CHECK(worst <= 8e-8);
}

TEST_CASE("the glide hands over to the constant-frequency path where its phase is under 1e-6 rad", "[render][glide]") {
    const double freq_hz = 1000.0;
    const double cents = GENERATE(25.0, -60.0);
    const double glide_s = 0.01;
    // The stated bound 4 pi f tau |x0| e^(-t/tau) at the hand-over time is the tolerance itself.
    const double x0 = cents * std::log(2.0) / 1200.0;
    const double t_end = glide_settled_s(freq_hz, cents, glide_s);
    CHECK_THAT(4.0 * M_PI * freq_hz * glide_s * std::abs(x0) * std::exp(-t_end / glide_s),
               Catch::Matchers::WithinRel(glide_phase_tolerance_rad, 1e-9));
    // The remaining phase there is within the bound, and G - R(t) tends to G.
    CHECK(std::abs(glide_remaining_phase_rad(freq_hz, cents, glide_s, t_end)) <= glide_phase_tolerance_rad);
    CHECK(std::abs(glide_phase_offset_rad(freq_hz, cents, glide_s, t_end) -
                   glide_total_phase_rad(freq_hz, cents, glide_s)) <= glide_phase_tolerance_rad);
    // A stretch rendered alone from inside the glide and across the hand-over gives the whole
    // render's samples (the exact stretch is evaluated per sample; the lanes anchor at a block).
    patch p = gliding_patch(freq_hz, cents, glide_s, 0.5);
    const render_params params{.sample_rate_hz = 48000.0, .include_noise = false};
    const std::vector<float> whole = render_patch(p, params);
    const partial_renderer r(p, params);
    std::vector<float> part(8192);
    r.render(1024, part);
    for (std::size_t n = 0; n < part.size(); ++n) {
        CAPTURE(n);
        REQUIRE(part[n] == whole[1024 + n]);
    }
}

TEST_CASE("glide keys round-trip and make the file version 4, files without them keep 2 and 3", "[patch][glide]") {
    const patch p = parse_patch(glide_text, "glide.toml").value;
    REQUIRE(p.partials.size() == 2);
    CHECK(p.partials[0].glide_cents == 40.0);
    CHECK(p.partials[0].glide_s == 0.03);
    CHECK(p.partials[1].glide_cents == 0.0);
    const std::string written = format_patch(p);
    CHECK_THAT(written, Contains("version = 4\n"));
    CHECK_THAT(written, Contains("glide_cents = 40.000\nglide_s = 0.030000\n"));
    CHECK(parse_patch(written, "again").value == p);
    CHECK(format_patch(parse_patch(written, "again").value) == written);
    // Rounded to the file's grid on load (0.001 cent, 1 us), so the writer round-trips it.
    const patch fine = parse_patch(with(with(glide_text, "40.0", "40.00049"), "0.03\n", "0.0300004\n"), "x").value;
    CHECK(fine.partials[0].glide_cents == 40.0);
    CHECK(fine.partials[0].glide_s == 0.03);
    // Without glides: version 2 (mono), and a version-1, -2 or -3 file reads as before.
    patch plain = p;
    plain.partials[0].glide_cents = 0.0;
    plain.partials[0].glide_s = 0.0;
    CHECK_THAT(format_patch(plain), Contains("version = 2\n"));
    CHECK_THAT(format_patch(plain), !Contains("glide_"));
    const std::string no_glide = with(with(glide_text, "glide_cents = 40.0\nglide_s = 0.03\n", ""), "version = 4", "version = 2");
    for (const char* version : {"version = 1", "version = 2", "version = 3"}) {
        CAPTURE(version);
        const patch old = parse_patch(with(no_glide, "version = 2", version), "old.toml").value;
        CHECK(old.partials[0].glide_cents == 0.0);
        CHECK(old.partials[0].glide_s == 0.0);
        CHECK(old.partials[0].phase_rad == 0.5);
    }
}

TEST_CASE("bad glide values are refused naming file, line and key", "[patch][glide][validate]") {
    expect_error(with(glide_text, "glide_s = 0.03", "glide_s = -0.03"), "glide_s = -0.03", "partial 1: glide_s",
                 "must be in (0, 2] s");
    expect_error(with(glide_text, "glide_s = 0.03", "glide_s = 0"), "glide_cents = 40.0", "partial 1: glide_cents",
                 "needs glide_s");
    expect_error(with(glide_text, "glide_s = 0.03", "glide_s = inf"), "glide_s = inf", "partial 1: glide_s", "finite");
    expect_error(with(glide_text, "glide_s = 0.03", "glide_s = nan"), "glide_s = nan", "partial 1: glide_s", "NaN");
    expect_error(with(glide_text, "glide_cents = 40.0", "glide_cents = -inf"), "glide_cents = -inf",
                 "partial 1: glide_cents", "finite");
    expect_error(with(glide_text, "glide_cents = 40.0", "glide_cents = nan"), "glide_cents = nan",
                 "partial 1: glide_cents", "NaN");
    expect_error(with(glide_text, "glide_cents = 40.0", "glide_cents = 1300"), "glide_cents = 1300",
                 "partial 1: glide_cents", "[-1200, 1200] cents");
    expect_error(with(glide_text, "glide_s = 0.03", "glide_s = 2.5"), "glide_s = 2.5", "partial 1: glide_s", "(0, 2] s");
    expect_error(with(glide_text, "glide_cents = 40.0\n", ""), "glide_s = 0.03", "partial 1: glide_s", "needs glide_cents");
    expect_error(with(glide_text, "version = 4", "version = 3"), "glide_cents = 40.0", "partial 1: glide_cents",
                 "needs version = 4");
    // A time constant under the file's 1 us grid rounds to 0 and is refused, saying so.
    expect_error(with(glide_text, "glide_s = 0.03", "glide_s = 0.0000001"), "glide_cents = 40.0",
                 "partial 1: glide_cents", "once rounded");
}

TEST_CASE("transposition keeps the glide in cents and blends mix it", "[transform][glide]") {
    const patch p = parse_patch(glide_text, "glide.toml").value;
    const patch up = transpose_semitones(p, 7.0);
    CHECK(up.partials[0].glide_cents == p.partials[0].glide_cents);
    CHECK(up.partials[0].glide_s == p.partials[0].glide_s);
    CHECK(scale_decay(p, 2.0).partials[0].glide_s == p.partials[0].glide_s);
    partial a = p.partials[0];
    partial b = a;
    b.glide_cents = 10.0;
    b.glide_s = 0.12;
    partial out;
    blend_glide(a, b, 0.25, out);
    CHECK_THAT(out.glide_cents, Catch::Matchers::WithinAbs(0.75 * 40.0 + 0.25 * 10.0, 1e-12));
    CHECK_THAT(out.glide_s, Catch::Matchers::WithinRel(std::exp(0.75 * std::log(0.03) + 0.25 * std::log(0.12)), 1e-12));
    b.glide_cents = 0.0;
    b.glide_s = 0.0;
    blend_glide(a, b, 0.25, out);
    CHECK(out.glide_cents == 30.0);
    CHECK(out.glide_s == 0.03);
    blend_glide(b, b, 0.5, out);
    CHECK(out.glide_cents == 0.0);
    CHECK(out.glide_s == 0.0);
}

TEST_CASE("the worked glide in patches/README.md gives the figures it states", "[glide]") {
    // 220 Hz, glide_cents = 40, glide_s = 0.03 (patches/README.md, "Pitch glide").
    CHECK_THAT(220.0 * std::exp2(40.0 / 1200.0), Catch::Matchers::WithinAbs(225.14, 0.005));
    CHECK_THAT(glide_cents_at(40.0, 0.03, 0.03), Catch::Matchers::WithinAbs(14.72, 0.005));
    CHECK_THAT(220.0 * std::exp2(glide_cents_at(40.0, 0.03, 0.03) / 1200.0), Catch::Matchers::WithinAbs(221.88, 0.005));
    CHECK_THAT(glide_cents_at(40.0, 0.03, 0.1), Catch::Matchers::WithinAbs(1.43, 0.005));
    CHECK_THAT(glide_total_phase_rad(220.0, 40.0, 0.03), Catch::Matchers::WithinAbs(0.964, 0.0005));
}

TEST_CASE("glide terms at many decays match the one-instant functions: R bit for bit, the excess within 4e-16",
          "[glide]") {
    // Offsets on both sides of the series' limits (108 and 216 cents) and decays over [0, 1]: R against
    // glide_remaining_phase_at_decay_rad (the same series), the excess against the library's expm1.
    const std::vector<double> decay = [] {
        std::vector<double> d;
        for (int b = 0; b <= 200; ++b) d.push_back(std::exp(-0.05 * b));
        d.push_back(0.0);
        return d;
    }();
    for (const double cents : {-1200.0, -216.5, -215.0, -150.0, -108.5, -100.0, -37.25, -0.5, 0.0, 0.5, 4.0, 96.0, 107.9, 109.0, 142.0,
                               192.0, 215.9, 217.0, 700.0}) {
        for (const double glide_s : {0.005, 0.25}) {
            std::vector<double> remaining(decay.size()), excess(decay.size());
            glide_terms_at_decays(cents, glide_s, decay, remaining, excess);
            for (std::size_t b = 0; b < decay.size(); ++b) {
                INFO("cents " << cents << ", glide_s " << glide_s << ", decay " << decay[b]);
                CHECK(remaining[b] == glide_remaining_phase_at_decay_rad(1.0, cents, glide_s, decay[b]));
                const double want = std::expm1(std::log(2.0) / 1200.0 * cents * decay[b]);
                CHECK(std::abs(excess[b] - want) <= 4e-16 * std::abs(want));
            }
        }
    }
}

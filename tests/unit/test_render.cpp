// The renderer (src/synthesis/render.cpp) against references outside it: a direct double-precision
// evaluation of the patch formula written here from the format's definition (patches/README.md), Schroeder
// backward integration (ISO 3382-1) written here, and FFTW as the reference FFT.
#include <catch2/catch.hpp>

#include <fftw3.h>

#include <algorithm>
#include <cmath>
#include <cstring>
#include <vector>

#include "core/patch.hpp"
#include "synthesis/damped_kernels.hpp"
#include "synthesis/render.hpp"
#include "test_signals.hpp"

using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;
using namespace wane;

namespace {

/// The envelope amplitude from the format's definition (patch format v1), written independently of
/// core/envelope.cpp: linear ramp 0 -> peak over [0, attack_s); then each decay segment changes the
/// level at -60 / t60_s dB per second from where the previous ended, until its until_s (the last
/// runs on). Requires until_s increasing and after attack_s (true for every patch built here).
struct reference_envelope {
    double attack_s = 0.0;
    double peak_amp = 0.0;
    std::vector<double> start_s;      // segment starts
    std::vector<double> start_db;     // level at each start
    std::vector<double> slope_db_s;   // dB per second

    explicit reference_envelope(const envelope& env)
        : attack_s(env.attack_s), peak_amp(std::pow(10.0, env.peak.db / 20.0)) {
        double t = env.attack_s;
        double level = env.peak.db;
        for (const decay_segment& seg : env.decay) {
            const double slope = std::isinf(seg.t60_s) ? 0.0 : -60.0 / seg.t60_s;
            start_s.push_back(t);
            start_db.push_back(level);
            slope_db_s.push_back(slope);
            if (!seg.until_s) break;
            level += slope * (*seg.until_s - t);
            t = *seg.until_s;
        }
    }
    double amp(double t_s) const {
        if (t_s < attack_s) return peak_amp * t_s / attack_s;
        std::size_t i = 0;
        while (i + 1 < start_s.size() && t_s >= start_s[i + 1]) ++i;
        return std::pow(10.0, (start_db[i] + slope_db_s[i] * (t_s - start_s[i])) / 20.0);
    }
};

/// The band-limit fade from its definition in render.hpp (written here, not the renderer's
/// band_limit_gain): 1 up to band_fade_start_fraction of Nyquist, 0 from Nyquist on, a raised
/// cosine 1 -> 0 between them.
double reference_band_gain(double freq_hz, double rate_hz) {
    const double nyquist_hz = rate_hz / 2.0;
    const double start_hz = nyquist_hz * band_fade_start_fraction;
    if (freq_hz < start_hz) return 1.0;
    if (freq_hz >= nyquist_hz) return 0.0;
    const double x = (freq_hz - start_hz) / (nyquist_hz - start_hz);  // 0 .. 1 across the fade
    return (1.0 + std::cos(pi * x)) / 2.0;
}

/// The end fade from its definition in render.hpp (written here, not the renderer's
/// end_fade_gain): the last L = min(total, round(end_fade_s * rate)) frames are multiplied by
/// (1 + cos(pi (k + 1) / L)) / 2, k = 0 .. L - 1 counted from the first of them.
double reference_end_fade(std::size_t n, std::size_t total, double rate_hz) {
    const double fade_len = std::min(static_cast<double>(total), std::round(end_fade_s * rate_hz));
    const double from_end = static_cast<double>(total) - static_cast<double>(n);  // 1 for the last frame
    if (from_end > fade_len) return 1.0;
    const double k = fade_len - from_end;
    return (1.0 + std::cos(pi * (k + 1.0) / fade_len)) / 2.0;
}

/// Direct evaluation of a render at frame n: G * sum_k band_gain(f_k) A_k(t) cos(2 pi f_k t + phi_k)
/// times the end fade, t = n / rate, all in double, term by term, every part written here.
struct direct_render {
    double rate_hz;
    std::size_t frames;
    double gain_lin;
    std::vector<const partial*> parts;
    std::vector<reference_envelope> envs;
    std::vector<double> band_gain;

    direct_render(const patch& p, const render_params& params)
        : rate_hz(params.sample_rate_hz), frames(render_frames(p, params)),
          gain_lin(std::pow(10.0, (p.note.gain_db + params.gain_db) / 20.0)) {
        for (const partial& part : p.partials) {
            parts.push_back(&part);
            envs.emplace_back(part.env);
            band_gain.push_back(reference_band_gain(part.freq_hz, rate_hz));
        }
    }
    double at(std::size_t n) const {
        const double t_s = static_cast<double>(n) / rate_hz;
        double sum = 0.0;
        for (std::size_t k = 0; k < parts.size(); ++k) {
            if (band_gain[k] == 0.0) continue;
            sum += band_gain[k] * envs[k].amp(t_s) * std::cos(two_pi * parts[k]->freq_hz * t_s + parts[k]->phase_rad);
        }
        return gain_lin * sum * reference_end_fade(n, frames, rate_hz);
    }
};

/// 10 log10(error energy / signal energy) over frames first, first + stride, ... < last.
double error_energy_db(const std::vector<float>& y, const direct_render& ref, std::size_t first,
                       std::size_t last, std::size_t stride) {
    double sig = 0.0;
    double err = 0.0;
    for (std::size_t n = first; n < last; n += stride) {
        const double r = ref.at(n);
        const double e = static_cast<double>(y[n]) - r;
        sig += r * r;
        err += e * e;
    }
    return 10.0 * std::log10(err / sig);
}

partial make_partial(double freq_hz, double phase_rad, double attack_s, double peak_db,
                     std::vector<decay_segment> decay) {
    return partial{.freq_hz = freq_hz, .harmonic = 0, .phase_rad = phase_rad,
                   .env = {.attack_s = attack_s, .peak = level_db{peak_db}, .decay = std::move(decay)}};
}

patch make_patch(std::vector<partial> parts, double length_s) {
    patch p;
    p.note.length_s = length_s;
    p.partials = std::move(parts);
    canonicalize(p);
    return p;
}

/// 200 random partials with 1-4 decay segments (falling, held and rising), attacks 0-30 ms; most
/// below the fade zone, a few inside it and a few above Nyquist.
patch random_patch(std::uint32_t seed, double rate_hz, double length_s) {
    splitmix64 rng{seed};
    const test::uniform_draw<double> unit{0.0, 1.0};
    const double nyquist_hz = 0.5 * rate_hz;
    std::vector<partial> parts;
    for (int k = 0; k < 200; ++k) {
        double freq_hz = std::exp(std::log(30.0) + (std::log(0.94 * nyquist_hz) - std::log(30.0)) * unit(rng));
        if (k < 6) freq_hz = nyquist_hz * (band_fade_start_fraction + (1.0 - band_fade_start_fraction) * unit(rng));
        if (k >= 6 && k < 10) freq_hz = nyquist_hz * (1.0 + 0.1 * unit(rng));
        const double attack_s = k % 10 == 3 ? 0.0 : 0.0005 + 0.03 * unit(rng);
        std::vector<decay_segment> decay;
        const int segments = 1 + static_cast<int>(4.0 * unit(rng)) % 4;
        double t = attack_s;
        for (int s = 0; s < segments; ++s) {
            const double u = unit(rng);
            const double t60_s = u < 0.15 ? infinity : u < 0.25 ? -(5.0 + 15.0 * unit(rng)) : 0.3 + 8.0 * unit(rng);
            t += 0.05 + 2.0 * unit(rng);
            const bool last = s + 1 == segments;
            decay.push_back({.t60_s = t60_s, .until_s = last ? std::optional<double>{} : std::optional<double>{t}});
        }
        parts.push_back(make_partial(freq_hz, two_pi * unit(rng), attack_s, -60.0 + 40.0 * unit(rng), decay));
    }
    return make_patch(std::move(parts), length_s);
}

/// Schroeder backward integration (Schroeder 1965; ISO 3382-1, T30; method from memory): energy
/// decay curve EDC(n) = sum_{k >= n} y[k]^2, in dB relative to EDC(0); decay time from the
/// least-squares line through the EDC between -5 dB and -35 dB (T30), extrapolated to 60 dB.
double schroeder_t30_s(const std::vector<float>& y, double rate_hz) {
    std::vector<double> edc(y.size() + 1, 0.0);
    for (std::size_t n = y.size(); n-- > 0;) edc[n] = edc[n + 1] + static_cast<double>(y[n]) * static_cast<double>(y[n]);
    double sx = 0.0, sy = 0.0, sxx = 0.0, sxy = 0.0, count = 0.0;
    for (std::size_t n = 0; n < y.size(); ++n) {
        const double db = 10.0 * std::log10(edc[n] / edc[0]);
        if (db > -5.0 || db < -35.0) continue;
        const double t = static_cast<double>(n) / rate_hz;
        sx += t; sy += db; sxx += t * t; sxy += t * db; count += 1.0;
    }
    const double slope_db_per_s = (count * sxy - sx * sy) / (count * sxx - sx * sx);
    return -60.0 / slope_db_per_s;
}

/// Magnitude spectrum |X_k| (k = 0 .. fft_size/2) by FFTW of y (times window w, if given),
/// zero padded to fft_size.
std::vector<double> fftw_magnitude(const std::vector<double>& y, std::size_t fft_size) {
    auto* in = static_cast<double*>(fftw_malloc(sizeof(double) * fft_size));
    auto* out = static_cast<fftw_complex*>(fftw_malloc(sizeof(fftw_complex) * (fft_size / 2 + 1)));
    fftw_plan plan = fftw_plan_dft_r2c_1d(static_cast<int>(fft_size), in, out, FFTW_ESTIMATE);
    std::fill(in, in + fft_size, 0.0);
    std::copy(y.begin(), y.end(), in);
    fftw_execute(plan);
    std::vector<double> mag(fft_size / 2 + 1);
    for (std::size_t k = 0; k < mag.size(); ++k) mag[k] = std::hypot(out[k][0], out[k][1]);
    fftw_destroy_plan(plan);
    fftw_free(in);
    fftw_free(out);
    return mag;
}

/// 4-term Blackman-Harris window, -92 dB highest sidelobe (Harris 1978; coefficients from memory).
std::vector<double> blackman_harris(const std::vector<double>& y) {
    const double a0 = 0.35875, a1 = 0.48829, a2 = 0.14128, a3 = 0.01168;  // Harris 1978, from memory
    std::vector<double> w(y.size());
    const double n_len = static_cast<double>(y.size());
    for (std::size_t n = 0; n < y.size(); ++n) {
        const double x = two_pi * static_cast<double>(n) / n_len;
        w[n] = y[n] * (a0 - a1 * std::cos(x) + a2 * std::cos(2.0 * x) - a3 * std::cos(3.0 * x));
    }
    return w;
}

std::vector<double> to_double(const std::vector<float>& y) { return {y.begin(), y.end()}; }

}  // namespace

TEST_CASE("200 partials over 10 s match a direct double evaluation within -100 dB", "[render]") {
    const double rate_hz = 48000.0;
    const patch p = random_patch(12345, rate_hz, 10.0);
    const render_params params{.sample_rate_hz = rate_hz, .gain_db = -3.0};
    const std::vector<float> y = render_patch(p, params);
    REQUIRE(y.size() == 480000);
    const direct_render ref(p, params);
    // The direct evaluation (std::pow + std::cos per partial and sample) over all 96M terms takes
    // several seconds, so it is evaluated on every 7th frame (7 is prime to the lane count and to
    // the anchor interval, so every lane position and anchor offset is sampled).
    const double err_db = error_energy_db(y, ref, 0, y.size(), 7);
    CAPTURE(err_db);
    CHECK(err_db <= -100.0);
    // Also on the first 50 ms, every frame: the attacks and the first anchors.
    const double attack_err_db = error_energy_db(y, ref, 0, 2400, 1);
    CAPTURE(attack_err_db);
    CHECK(attack_err_db <= -100.0);
}

TEST_CASE("accuracy holds at every output rate", "[render]") {
    // The same kind of random patch (frequencies relative to each rate's Nyquist) at the ends and
    // the middle of the accepted range, 2 s, every frame compared.
    const double rate_hz = GENERATE(8000.0, 22050.0, 44100.0, 96000.0, 192000.0);
    const patch p = random_patch(999, rate_hz, 2.0);
    const render_params params{.sample_rate_hz = rate_hz, .gain_db = 6.0};
    const std::vector<float> y = render_patch(p, params);
    const direct_render ref(p, params);
    // Every frame below 32 kHz; above, an odd stride (3, 7, 13: prime to the lane count and the
    // anchor interval, so every lane position is sampled) keeps the direct evaluation near 6M terms.
    const std::size_t stride = 2 * static_cast<std::size_t>(rate_hz / 32000.0) + 1;
    const double err_db = error_energy_db(y, ref, 0, y.size(), stride);
    CAPTURE(rate_hz, err_db);
    CHECK(err_db <= -100.0);
}

TEST_CASE("float drift stays bounded over minutes", "[render]") {
    const double rate_hz = 48000.0;
    const double length_s = 300.0;
    std::vector<partial> parts;
    for (int k = 0; k < 5; ++k) {
        parts.push_back(make_partial(110.0 * (k + 1) * 1.0013 + 0.37 * k, 0.3 * k, 0.01, -12.0 - 3.0 * k,
                                     {{.t60_s = infinity, .until_s = {}}}));
    }
    const patch p = make_patch(parts, length_s);
    const render_params params{.sample_rate_hz = rate_hz};
    const std::vector<float> y = render_patch(p, params);
    const direct_render ref(p, params);
    const auto second = static_cast<std::size_t>(rate_hz);
    const double first_db = error_energy_db(y, ref, second, 2 * second, 1);
    const double last_db = error_energy_db(y, ref, y.size() - 2 * second, y.size() - second, 1);
    CAPTURE(first_db, last_db);
    CHECK(first_db <= -100.0);
    CHECK(last_db <= -100.0);
    // Exact ground truth: the error does not grow with time (within 6 dB of the first second's).
    CHECK(last_db <= first_db + 6.0);
}

TEST_CASE("a 1000 Hz partial with T60 = 2 s: Schroeder T30 and FFT frequency", "[render]") {
    const double rate_hz = 48000.0;
    const patch p = make_patch({make_partial(1000.0, 0.4, 0.0, -6.0, {{.t60_s = 2.0, .until_s = {}}})}, 6.0);
    const std::vector<float> y = render_patch(p, {.sample_rate_hz = rate_hz});

    const double t30_s = schroeder_t30_s(y, rate_hz);
    CAPTURE(t30_s);
    CHECK_THAT(t30_s, WithinRel(2.0, 0.01));  // exact ground truth T60 = 2 s; project tolerance 1 %

    // Long FFT (FFTW), zero padded 7x to 2^21 points (bin 0.0229 Hz), parabolic interpolation of
    // the log magnitude around the peak bin.
    const std::size_t fft_size = std::size_t{1} << 21;
    const std::vector<double> mag = fftw_magnitude(to_double(y), fft_size);
    const double bin_hz = rate_hz / static_cast<double>(fft_size);
    const auto k = static_cast<std::size_t>(std::max_element(mag.begin() + 1, mag.end() - 1) - mag.begin());
    const double a = std::log(mag[k - 1]), b = std::log(mag[k]), c = std::log(mag[k + 1]);
    const double offset_bins = 0.5 * (a - c) / (a - 2.0 * b + c);
    const double freq_hz = (static_cast<double>(k) + offset_bins) * bin_hz;
    CAPTURE(freq_hz, k, offset_bins);
    CHECK_THAT(freq_hz, WithinAbs(1000.0, 0.001));  // project requirement: within 0.001 Hz
}

TEST_CASE("a partial above the output Nyquist is left out: no alias at 12 kHz", "[render]") {
    // Partials at 1, 3, 7, 15 and 20 kHz rendered at 32 kHz: 20 kHz would alias to 32 - 20 = 12 kHz.
    const double rate_hz = 32000.0;
    std::vector<partial> parts;
    for (const double f : {1000.0, 3000.0, 7000.0, 15000.0, 20000.0}) {
        parts.push_back(make_partial(f, 0.5, 0.01, -12.0, {{.t60_s = infinity, .until_s = {}}}));
    }
    const patch p = make_patch(parts, 2.0);
    const render_params params{.sample_rate_hz = rate_hz};
    const render_summary summary = summarize_render(p, params);
    CHECK(summary.partials_above_nyquist == 1);
    CHECK(summary.partials_rendered == 4);

    const std::size_t fft_size = std::size_t{1} << 16;  // the whole 2 s render (64000 frames)
    const double bin_hz = rate_hz / static_cast<double>(fft_size);
    // Strongest line vs the largest bin within +-50 Hz of 12 kHz, Blackman-Harris window (FFTW).
    auto alias_db = [&](const std::vector<double>& y) {
        const std::vector<double> mag = fftw_magnitude(blackman_harris(y), fft_size);
        const double strongest = *std::max_element(mag.begin(), mag.end());
        double near_alias = 0.0;
        for (std::size_t k = 0; k < mag.size(); ++k) {
            if (std::abs(static_cast<double>(k) * bin_hz - 12000.0) <= 50.0) near_alias = std::max(near_alias, mag[k]);
        }
        return 20.0 * std::log10(near_alias / strongest);
    };
    const double rendered_db = alias_db(to_double(render_patch(p, params)));
    // The same signal evaluated directly with the 20 kHz partial kept (naive sampling): the
    // measurement sees the alias there, so it would see one in the render.
    std::vector<double> naive(render_frames(p, params));
    for (std::size_t n = 0; n < naive.size(); ++n) {
        const double t = static_cast<double>(n) / rate_hz;
        for (const partial& part : p.partials) {
            naive[n] += reference_envelope(part.env).amp(t) * std::cos(two_pi * part.freq_hz * t + part.phase_rad);
        }
    }
    const double naive_db = alias_db(naive);
    CAPTURE(rendered_db, naive_db);
    CHECK(rendered_db <= -100.0);
    CHECK(naive_db >= -1.0);  // the aliased 20 kHz line is as strong as the others
}

TEST_CASE("band-limit gain follows its stated raised-cosine definition", "[render]") {
    const double rate_hz = 44100.0;
    const double nyq = 22050.0;
    // Hand values of 0.5 (1 + cos(pi (f - 0.95 nyq) / (0.05 nyq))):
    CHECK(band_limit_gain(0.95 * nyq, rate_hz) == 1.0);
    CHECK(band_limit_gain(1000.0, rate_hz) == 1.0);
    CHECK_THAT(band_limit_gain(0.975 * nyq, rate_hz), WithinAbs(0.5, 1e-12));
    CHECK_THAT(band_limit_gain(0.9625 * nyq, rate_hz), WithinAbs(0.5 * (1.0 + std::cos(pi / 4.0)), 1e-12));
    CHECK(band_limit_gain(nyq, rate_hz) == 0.0);
    CHECK(band_limit_gain(30000.0, rate_hz) == 0.0);
    // Continuous at both ends of the zone (exact ground truth of the formula).
    CHECK_THAT(band_limit_gain(0.95 * nyq + 1e-6, rate_hz), WithinAbs(1.0, 1e-12));
    CHECK_THAT(band_limit_gain(nyq - 1e-6, rate_hz), WithinAbs(0.0, 1e-12));
}

TEST_CASE("a transposed partial crossing the fade zone gives no click", "[render]") {
    // One partial (attack 5 ms, T60 3 s, peak -1 dB) at 20 kHz transposed up in steps of 10 Hz
    // through the fade zone (20947.5 .. 22050 Hz at 44.1 kHz) to beyond Nyquist. For each render:
    // (1) the largest sample-to-sample step (from an implicit 0 before frame 0) stays below the
    // largest a smooth signal of that amplitude can make: 2 sin(pi f / rate) A_eff (sinusoid)
    // + A_eff / attack_frames (ramp) + A_eff pi / (2 fade_frames) (end fade), A_eff = A
    // band_limit_gain(f), with 1e-5 relative margin for float rounding (exact ground truth);
    // (2) no sample exceeds A_eff; (3) the level is continuous across transpositions: the RMS of
    // neighbouring renders differs by at most the gain's largest change over 10 Hz,
    // pi / (2 * 0.05 * nyquist) * 10 Hz = 1.42 % of the unfaded RMS, plus 0.5 % for the beat of
    // a partial near Nyquist against the sampling (common-practice allowance, no source).
    const double rate_hz = 44100.0;
    const double peak_amp = std::pow(10.0, -1.0 / 20.0);
    const double attack_s = 0.005;
    const double fade_frames = std::round(end_fade_s * rate_hz);
    const double base_hz = 20000.0;
    double unfaded_rms = 0.0;
    double previous_rms = -1.0;
    double largest_rms_jump = 0.0;
    for (int step = 0; step <= 220; ++step) {
        const double ratio = (base_hz + 10.0 * step) / base_hz;  // the transposition
        const double freq_hz = base_hz * ratio;
        const patch p = make_patch({make_partial(freq_hz, 1.1, attack_s, -1.0, {{.t60_s = 3.0, .until_s = {}}})}, 0.1);
        const std::vector<float> y = render_patch(p, {.sample_rate_hz = rate_hz});
        const double a_eff = peak_amp * reference_band_gain(freq_hz, rate_hz);
        const double bound = (2.0 * std::sin(pi * std::min(freq_hz, 0.5 * rate_hz) / rate_hz) * a_eff +
                              a_eff / (attack_s * rate_hz) + a_eff * pi / (2.0 * fade_frames)) * (1.0 + 1e-5) + 1e-7;
        double max_step = std::abs(static_cast<double>(y[0]));
        double peak = 0.0;
        double energy = 0.0;
        for (std::size_t n = 1; n < y.size(); ++n) {
            max_step = std::max(max_step, std::abs(static_cast<double>(y[n]) - static_cast<double>(y[n - 1])));
        }
        for (const float v : y) {
            peak = std::max(peak, std::abs(static_cast<double>(v)));
            energy += static_cast<double>(v) * static_cast<double>(v);
        }
        const double rms = std::sqrt(energy / static_cast<double>(y.size()));
        if (step == 0) unfaded_rms = rms;
        CAPTURE(freq_hz, max_step, bound, peak, a_eff, rms);
        CHECK(max_step <= bound);
        CHECK(peak <= a_eff * (1.0 + 1e-5) + 1e-7);
        if (previous_rms >= 0.0) largest_rms_jump = std::max(largest_rms_jump, std::abs(rms - previous_rms));
        previous_rms = rms;
    }
    const double allowed_jump = (pi / (2.0 * 0.05 * 0.5 * rate_hz) * 10.0 + 0.005) * unfaded_rms;
    CAPTURE(largest_rms_jump, allowed_jump, unfaded_rms, previous_rms);
    CHECK(largest_rms_jump <= allowed_jump);
    CHECK(previous_rms == 0.0);  // 22200 Hz: above Nyquist, left out
}

TEST_CASE("the attack follows the format's definition", "[render]") {
    const double rate_hz = 48000.0;
    const double attack_s = 0.02;  // 960 frames
    const double peak_amp = std::pow(10.0, -3.0 / 20.0);
    const patch p = make_patch({make_partial(440.0, 0.7, attack_s, -3.0, {{.t60_s = 1.5, .until_s = {}}})}, 0.5);
    const std::vector<float> y = render_patch(p, {.sample_rate_hz = rate_hz});
    CHECK(y[0] == 0.0F);  // amplitude 0 at t = 0
    double max_err = 0.0;
    for (std::size_t n = 0; n < 960; ++n) {
        const double t = static_cast<double>(n) / rate_hz;
        const double expected = peak_amp * t / attack_s * std::cos(two_pi * 440.0 * t + 0.7);  // the format's linear attack
        max_err = std::max(max_err, std::abs(static_cast<double>(y[n]) - expected));
    }
    // At the end of the attack the level is the peak, then falls 60 dB per 1.5 s.
    for (const std::size_t n : {960u, 961u, 4800u, 20000u}) {
        const double t = static_cast<double>(n) / rate_hz;
        const double expected = peak_amp * std::pow(10.0, -60.0 / 1.5 * (t - attack_s) / 20.0) *
                                std::cos(two_pi * 440.0 * t + 0.7);
        max_err = std::max(max_err, std::abs(static_cast<double>(y[n]) - expected));
    }
    // The renderer's float error budget (src/synthesis/render.cpp): at most
    // render_anchor_frames / render_lanes float steps from an exact anchor, ~2 * 2^-24 each.
    const double steps = static_cast<double>(render_anchor_frames / render_lanes);
    const double tolerance = steps * 2.0 * std::ldexp(1.0, -24) * peak_amp;
    CAPTURE(max_err, tolerance);
    CHECK(max_err <= tolerance);

    // attack_s = 0: full amplitude at frame 0.
    const patch q = make_patch({make_partial(440.0, 0.7, 0.0, -3.0, {{.t60_s = 1.5, .until_s = {}}})}, 0.5);
    const std::vector<float> z = render_patch(q, {.sample_rate_hz = rate_hz});
    CHECK_THAT(static_cast<double>(z[0]), WithinAbs(peak_amp * std::cos(0.7), 1e-7));
}

TEST_CASE("the end of a render fades to 0 with the stated raised cosine", "[render]") {
    const double rate_hz = 48000.0;
    const patch p = make_patch({make_partial(100.0, 0.0, 0.0, -6.0, {{.t60_s = infinity, .until_s = {}}})}, 1.0);
    const std::vector<float> y = render_patch(p, {.sample_rate_hz = rate_hz});
    REQUIRE(y.size() == 48000);
    CHECK(y.back() == 0.0F);
    CHECK(end_fade_gain(48000 - 480 - 1, 48000, rate_hz) == 1.0);  // 10 ms = 480 frames
    CHECK_THAT(end_fade_gain(48000 - 240 - 1, 48000, rate_hz), WithinAbs(0.5, 1e-12));  // half way
    const std::size_t n = 48000 - 240 - 1;
    const double expected = std::pow(10.0, -6.0 / 20.0) * 0.5 * std::cos(two_pi * 100.0 * static_cast<double>(n) / rate_hz);
    CHECK_THAT(static_cast<double>(y[n]), WithinAbs(expected, 1e-6));
}

TEST_CASE("rendering is deterministic and leaves out what it should", "[render]") {
    const patch p = random_patch(777, 44100.0, 2.0);
    const render_params params{.sample_rate_hz = 44100.0};
    const std::vector<float> a = render_patch(p, params);
    const std::vector<float> b = render_patch(p, params);
    REQUIRE(a.size() == b.size());
    CHECK(std::memcmp(a.data(), b.data(), a.size() * sizeof(float)) == 0);

    // Only a partial at 24 kHz, rendered at 48 kHz: at Nyquist, left out, silence.
    const patch q = make_patch({make_partial(24000.0, 0.0, 0.0, -6.0, {{.t60_s = 2.0, .until_s = {}}})}, 0.1);
    const std::vector<float> z = render_patch(q, {.sample_rate_hz = 48000.0});
    CHECK(std::all_of(z.begin(), z.end(), [](float v) { return v == 0.0F; }));
    CHECK(summarize_render(q, {.sample_rate_hz = 48000.0}).partials_above_nyquist == 1);

    // A patch with noise bands: the summary counts them, and none with the noise left out.
    patch with_noise = q;
    with_noise.noise.push_back({.low_hz = 100.0, .high_hz = 200.0, .env = q.partials[0].env});
    CHECK(summarize_render(with_noise, {.sample_rate_hz = 48000.0}).noise_bands_rendered == 1);
    CHECK(summarize_render(with_noise, {.sample_rate_hz = 48000.0, .include_noise = false}).noise_bands_rendered == 0);
}

#if defined(__x86_64__)
namespace {

// The oscillator kernels' one body (synthesis/damped_kernels.hpp) compiled here for AVX2 and for
// the x86-64 baseline, as render.cpp's kernel clones are (kernel_clones.hpp).
[[gnu::target("avx2")]] void damped_avx2(float* out, std::size_t frames, const float* re0, const float* im0,
                                         float step_re, float step_im) {
    damped_kernels::add_damped_lanes(out, frames, re0, im0, step_re, step_im);
}
void damped_generic(float* out, std::size_t frames, const float* re0, const float* im0, float step_re,
                    float step_im) {
    damped_kernels::add_damped_lanes(out, frames, re0, im0, step_re, step_im);
}
[[gnu::target("avx2")]] void ramped_avx2(float* out, std::size_t frames, const float* re0, const float* im0,
                                         const float* amp0, float step_re, float step_im, float amp_step) {
    damped_kernels::add_ramped_lanes(out, frames, re0, im0, amp0, step_re, step_im, amp_step);
}
void ramped_generic(float* out, std::size_t frames, const float* re0, const float* im0, const float* amp0,
                    float step_re, float step_im, float amp_step) {
    damped_kernels::add_ramped_lanes(out, frames, re0, im0, amp0, step_re, step_im, amp_step);
}

/// Index of the first float whose bits differ, or a.size() when all are equal.
std::size_t first_bit_difference(const std::vector<float>& a, const std::vector<float>& b) {
    for (std::size_t i = 0; i < a.size(); ++i) {
        if (std::memcmp(&a[i], &b[i], sizeof(float)) != 0) return i;
    }
    return a.size();
}

}  // namespace

TEST_CASE("the oscillator kernels compiled for AVX2 and for baseline x86-64 give the same bits", "[render][kernels]") {
    if (!__builtin_cpu_supports("avx2")) {
        WARN("this CPU has no AVX2: only the baseline kernel runs here, nothing to compare");
        return;
    }
    const std::size_t frames = GENERATE(std::size_t{1}, std::size_t{31}, std::size_t{32}, std::size_t{33},
                                        std::size_t{1000}, render_anchor_frames);
    CAPTURE(frames);
    splitmix64 rng{20261202 + frames};
    // Lane states: a damped phasor of random frequency (|m| just below 1) from a random start.
    const double w = rng.uniform(0.001, 3.1);
    const double r = 1.0 - rng.uniform(0.0, 1e-3);
    std::vector<float> re0(render_lanes), im0(render_lanes), amp0(render_lanes);
    for (std::size_t l = 0; l < render_lanes; ++l) {
        const double mag = std::pow(r, static_cast<double>(l));
        re0[l] = static_cast<float>(mag * std::cos(w * static_cast<double>(l) + 0.3));
        im0[l] = static_cast<float>(mag * std::sin(w * static_cast<double>(l) + 0.3));
        amp0[l] = static_cast<float>(1e-3 * static_cast<double>(l + 1));
    }
    const double lanes_d = static_cast<double>(render_lanes);
    const auto step_re = static_cast<float>(std::pow(r, lanes_d) * std::cos(w * lanes_d));
    const auto step_im = static_cast<float>(std::pow(r, lanes_d) * std::sin(w * lanes_d));
    std::vector<float> base(frames);
    for (float& v : base) v = static_cast<float>(rng.uniform(-0.5, 0.5));  // the block already holds other partials

    std::vector<float> a = base, b = base;
    damped_avx2(a.data(), frames, re0.data(), im0.data(), step_re, step_im);
    damped_generic(b.data(), frames, re0.data(), im0.data(), step_re, step_im);
    CHECK(a != base);  // the kernel added something
    const std::size_t damped_diff = first_bit_difference(a, b);
    CAPTURE(damped_diff);
    CHECK(damped_diff == frames);

    a = base;
    b = base;
    ramped_avx2(a.data(), frames, re0.data(), im0.data(), amp0.data(), step_re, step_im, 0.03f);
    ramped_generic(b.data(), frames, re0.data(), im0.data(), amp0.data(), step_re, step_im, 0.03f);
    CHECK(a != base);
    const std::size_t ramped_diff = first_bit_difference(a, b);
    CAPTURE(ramped_diff);
    CHECK(ramped_diff == frames);
}
#endif

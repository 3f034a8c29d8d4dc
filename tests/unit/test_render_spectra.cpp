// The renderer measured from outside: a partial's T60 by Schroeder backward integration (ISO 3382-1)
// and its frequency by FFTW, no alias above the output Nyquist, the band-limit fade against its
// stated raised cosine, and no click where a transposed partial crosses the fade zone.
#include <catch2/catch.hpp>

#include <fftw3.h>

#include <algorithm>
#include <cmath>
#include <vector>

#include "core/patch.hpp"
#include "synthesis/render.hpp"
#include "render_reference.hpp"
#include "test_signals.hpp"

using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;
using namespace wane;
using namespace wane::test;

namespace {

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

// The decay measures (src/measure): octave filters against IEC 61260-1:2014 and the exact
// Butterworth response, Schroeder decay against synthetic decays of known T60 (the comparison
// measures: test_compare_measures.cpp).
#include <catch2/catch.hpp>

#include <fftw3.h>

#include <cmath>
#include <cstdint>
#include <vector>

#include "core/units.hpp"
#include "measure/decay.hpp"
#include "measure/octave_filter.hpp"
#include "test_signals.hpp"

using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;
using namespace wane;

namespace {

constexpr double rate_hz = 48000.0;

/// White Gaussian noise with an exponential amplitude envelope falling 60 dB in t60_s, plus an
/// optional steady noise floor (separate seed) floor_db below the initial RMS.
std::vector<float> decaying_noise(double t60_s, double length_s, std::uint32_t seed, double floor_db = -infinity) {
    splitmix64 gen{seed};
    splitmix64 gen_floor{seed ^ 0x5a5a5a5au};
    const test::gaussian_draw<double> normal{0.0, 1.0};
    const std::size_t n = static_cast<std::size_t>(length_s * rate_hz);
    const double amp0 = 0.1;
    const double floor_amp = amp0 * std::pow(10.0, floor_db / 20.0);
    std::vector<float> x(n);
    for (std::size_t i = 0; i < n; ++i) {
        const double t = static_cast<double>(i) / rate_hz;
        const double env = amp0 * std::pow(10.0, -3.0 * t / t60_s);  // -60 dB at t60_s
        x[i] = static_cast<float>(env * normal(gen) + floor_amp * normal(gen_floor));
    }
    return x;
}

/// Analog Butterworth bandpass magnitude in dB at digital frequency f after the bilinear
/// transform with prewarped edges: |H|^2 = 1 / (1 + nu^(2N)), nu = (W^2 - W1 W2) / (W (W2 - W1)),
/// W = 2 fs tan(pi f / fs) (Butterworth definition; Oppenheim and Schafer, bilinear transform).
double butterworth_bandpass_db(double f_hz, const octave_band& band, double fs, int order) {
    auto warp = [&](double f) { return 2.0 * fs * std::tan(pi * f / fs); };
    const double w = warp(f_hz), w1 = warp(band.lower_edge_hz), w2 = warp(band.upper_edge_hz);
    const double nu = (w * w - w1 * w2) / (w * (w2 - w1));
    return -10.0 * std::log10(1.0 + std::pow(nu * nu, order));
}

}  // namespace

TEST_CASE("octave bands follow the IEC 61260-1:2014 base-ten series", "[measure][octave]") {
    CHECK_THAT(octave_ratio_base10, WithinRel(std::pow(10.0, 0.3), 1e-15));  // IEC 61260-1:2014: G = 10^(3/10)
    const octave_band b1k = octave_band_at(0);
    CHECK(b1k.nominal_hz == 1000.0);
    // IEC 61260-1:2014: band edges f_m G^(-1/2), f_m G^(1/2) = 1000 * 10^(-+0.15)
    CHECK_THAT(b1k.lower_edge_hz, WithinRel(707.9457843841, 1e-10));
    CHECK_THAT(b1k.upper_edge_hz, WithinRel(1412.5375446228, 1e-10));
    // IEC 61260-1:2014, Annex E (from memory): exact mid-band 125.89 Hz and 7943.3 Hz for the
    // nominal 125 Hz and 8 kHz bands; both are 1000 * 10^(0.3 x).
    const octave_band b125 = octave_band_at(-3);
    CHECK(b125.nominal_hz == 125.0);
    CHECK_THAT(b125.exact_mid_hz, WithinAbs(125.89, 0.005));
    const octave_band b8k = octave_band_at(3);
    CHECK(b8k.nominal_hz == 8000.0);
    CHECK_THAT(b8k.exact_mid_hz, WithinAbs(7943.28, 0.005));
    // 44.1 kHz: the 16 kHz band's upper edge (22.6 kHz) is above Nyquist, so it is left out.
    const auto bands = octave_bands_within(44100.0, 63.0, 16000.0);
    REQUIRE(!bands.empty());
    CHECK(bands.front().nominal_hz == 63.0);
    CHECK(bands.back().nominal_hz == 8000.0);
}

TEST_CASE("octave filter: -3.01 dB at the band edges and IEC 61260-1 class 1 limits", "[measure][octave]") {
    const double fs = GENERATE(44100.0, 48000.0, 96000.0);
    const int index = GENERATE(-4, -3, -2, -1, 0, 1, 2, 3);  // 63 Hz .. 8 kHz
    const octave_band band = octave_band_at(index);
    const octave_filter filter(band, fs);
    CAPTURE(fs, band.nominal_hz);
    const double ref_db = filter.gain_db(band.exact_mid_hz);
    const double g = octave_ratio_base10;
    // Relative attenuation: attenuation against the reference attenuation, here the design's
    // nominal passband gain of 0 dB (a Butterworth bandpass peaks at exactly 0 dB).
    auto rel_atten_db = [&](double omega) { return -filter.gain_db(band.exact_mid_hz * omega); };

    // Butterworth: the band edges are the half-power points, 10 log10(2) = 3.0103 dB down.
    const double at_lower = -filter.gain_db(band.lower_edge_hz);
    const double at_upper = -filter.gain_db(band.upper_edge_hz);
    CAPTURE(at_lower, at_upper);
    CHECK_THAT(at_lower, WithinAbs(3.0103, 0.001));
    CHECK_THAT(at_upper, WithinAbs(3.0103, 0.001));

    // IEC 61260-1:2014 Table 1, class 1 acceptance limits on relative attenuation (from memory):
    //   Omega = G^0         : -0.4 .. +0.4 dB
    //   Omega = G^(+-1/2)   : -0.4 .. +5.3 dB (the band edges)
    //   Omega = G^(+-1)     : >= +16.6 dB
    //   Omega = G^(+-2)     : >= +40.5 dB
    //   Omega = G^(+-3)     : >= +60.0 dB
    //   Omega = G^(+-4)     : >= +70.0 dB
    CHECK_THAT(rel_atten_db(1.0), WithinAbs(0.0, 0.4));
    // Tighter, from the design: the peak is at the warped centre, within 0.05 dB of f_m.
    CHECK_THAT(ref_db, WithinAbs(0.0, 0.05));
    for (const double sign : {-1.0, 1.0}) {
        const double edge = rel_atten_db(std::pow(g, sign * 0.5));
        CAPTURE(sign, edge);
        CHECK(edge >= -0.4);
        CHECK(edge <= 5.3);
        const struct { double x, min_db; } stop[] = {{1.0, 16.6}, {2.0, 40.5}, {3.0, 60.0}, {4.0, 70.0}};
        for (const auto& s : stop) {
            const double f = band.exact_mid_hz * std::pow(g, sign * s.x);
            if (f >= 0.5 * fs) continue;  // beyond Nyquist: nothing to measure
            const double a = rel_atten_db(std::pow(g, sign * s.x));
            INFO("Omega = G^" << sign * s.x << ": " << a << " dB >= " << s.min_db);
            CHECK(a >= s.min_db);
        }
    }

    // The designed filter against the exact Butterworth response on a log sweep.
    const double sweep_from_hz = band.exact_mid_hz / 16.0;
    for (int step = 0; sweep_from_hz * std::pow(1.1, step) < 0.49 * fs; ++step) {
        const double f = sweep_from_hz * std::pow(1.1, step);
        const double expect = butterworth_bandpass_db(f, band, fs, default_octave_prototype_order);
        INFO("f = " << f << " Hz: " << filter.gain_db(f) << " vs " << expect);
        CHECK_THAT(filter.gain_db(f), WithinAbs(expect, 1e-6 + 1e-6 * std::abs(expect)));
    }
}

TEST_CASE("octave filter applied to sines matches its response", "[measure][octave]") {
    const octave_band band = octave_band_at(GENERATE(-3, 0, 3));
    const octave_filter filter(band, rate_hz);
    for (const double f : {band.exact_mid_hz, band.lower_edge_hz, band.upper_edge_hz, 2.0 * band.upper_edge_hz}) {
        const std::size_t n = static_cast<std::size_t>(rate_hz);  // 1 s
        std::vector<float> x(n);
        for (std::size_t i = 0; i < n; ++i) x[i] = static_cast<float>(0.5 * std::sin(two_pi * f * static_cast<double>(i) / rate_hz));
        const std::vector<float> y = filter.apply(x);
        // Steady state: RMS over the second half (the filter has rung in by then).
        double sx = 0.0, sy = 0.0;
        for (std::size_t i = n / 2; i < n; ++i) {
            sx += static_cast<double>(x[i]) * static_cast<double>(x[i]);
            sy += static_cast<double>(y[i]) * static_cast<double>(y[i]);
        }
        const double measured_db = 10.0 * std::log10(sy / sx);
        INFO("band " << band.nominal_hz << " Hz, sine " << f << " Hz: " << measured_db << " vs " << filter.gain_db(f));
        CHECK_THAT(measured_db, WithinAbs(filter.gain_db(f), 0.02));
    }
}

TEST_CASE("Schroeder curve of an exact exponential decay is a straight line", "[measure][decay]") {
    // x[n] = r^n, r = 10^(-3 / (T60 fs)): amplitude falls 60 dB in T60. With the exact tail
    // sum_{m >= N} r^(2m) = r^(2N) / (1 - r^2) (geometric series) the normalised backward
    // integral is exactly r^(2n): L[n] = -60 n / (T60 fs) dB.
    const double t60_s = GENERATE(0.3, 1.5, 4.0);
    const double r = std::pow(10.0, -3.0 / (t60_s * rate_hz));
    const std::size_t n = static_cast<std::size_t>(rate_hz);  // 1 s
    std::vector<float> x(n);
    for (std::size_t i = 0; i < n; ++i) x[i] = static_cast<float>(std::pow(r, static_cast<double>(i)));
    // The tail of the double-precision series; the 1e-4 dB tolerance below covers the float
    // rounding of the stored samples.
    const double tail = std::pow(r, 2.0 * static_cast<double>(n)) / (1.0 - r * r);
    const std::vector<double> curve = schroeder_curve_db(x, n, tail);
    for (std::size_t i = 0; i < n; i += 4801) {
        const double expect = -60.0 * static_cast<double>(i) / (t60_s * rate_hz);
        CAPTURE(t60_s, i, curve[i], expect);
        CHECK_THAT(curve[i], WithinAbs(expect, 1e-4));
    }
    const decay_fit t20 = fit_decay_range(curve, rate_hz, decay_eval_start_db, t20_eval_end_db);
    CAPTURE(t20.t60_s, t20.correlation);
    if (t60_s * 25.0 / 60.0 < 1.0) {
        CHECK_THAT(t20.t60_s, WithinRel(t60_s, 1e-5));
        CHECK(t20.correlation < -0.999999);
    } else {
        CHECK(std::isnan(t20.t60_s));  // -25 dB not reached within 1 s
    }
}

TEST_CASE("decay of an exponentially decaying sine", "[measure][decay]") {
    // 440 Hz, T60 = 1.2 s, 4 s long, steady noise floor 90 dB below the start.
    const double t60_s = 1.2;
    splitmix64 gen{7};
    const test::gaussian_draw<double> normal{0.0, 1.0};
    std::vector<float> x(static_cast<std::size_t>(4.0 * rate_hz));
    for (std::size_t i = 0; i < x.size(); ++i) {
        const double t = static_cast<double>(i) / rate_hz;
        x[i] = static_cast<float>(0.5 * std::pow(10.0, -3.0 * t / t60_s) * std::sin(two_pi * 440.0 * t) +
                                  0.5 * std::pow(10.0, -90.0 / 20.0) * normal(gen));
    }
    const decay_times d = measure_decay(x, rate_hz);
    CAPTURE(d.t20_s, d.t30_s, d.dynamic_range_db, d.crosspoint.crosspoint_frames, d.crosspoint.iterations);
    CHECK(d.crosspoint.found);
    // The line meets the floor where the sine's mean square 0.5^2 / 2 has fallen to the noise's
    // (0.5 * 10^-4.5)^2: 10 log10(0.125 / 2.5e-10) = 87.0 dB, at 87.0 / 60 * 1.2 = 1.74 s. Within 3 %.
    CHECK_THAT(static_cast<double>(d.crosspoint.crosspoint_frames) / rate_hz, WithinRel(1.74, 0.03));
    CHECK_THAT(d.t20_s, WithinRel(t60_s, 0.005));
    CHECK_THAT(d.t30_s, WithinRel(t60_s, 0.005));
}

/// Periodic pseudo-random white noise: one period of period_frames with a flat magnitude
/// spectrum (every bin 1 .. N/2 at magnitude 1, seeded uniform random phases, DC 0) made with
/// FFTW's inverse real FFT, normalised to RMS 1, repeated to length_frames.
std::vector<double> periodic_white_noise(int period_frames, std::size_t length_frames, std::uint32_t seed) {
    splitmix64 gen{seed};
    const test::uniform_draw<double> phase{0.0, two_pi};
    std::vector<double> period(static_cast<std::size_t>(period_frames));
    fftw_complex* spec = fftw_alloc_complex(static_cast<std::size_t>(period_frames) / 2 + 1);
    fftw_plan plan = fftw_plan_dft_c2r_1d(period_frames, spec, period.data(), FFTW_ESTIMATE);
    spec[0][0] = spec[0][1] = 0.0;
    for (int k = 1; k <= period_frames / 2; ++k) {
        const double ph = phase(gen);
        spec[k][0] = std::cos(ph);
        spec[k][1] = std::sin(ph);
    }
    spec[period_frames / 2][1] = 0.0;  // Nyquist bin is real
    fftw_execute(plan);
    fftw_destroy_plan(plan);
    fftw_free(spec);
    double sum_sq = 0.0;
    for (double v : period) sum_sq += v * v;
    const double rms = std::sqrt(sum_sq / period_frames);
    std::vector<double> out(length_frames);
    for (std::size_t i = 0; i < length_frames; ++i) out[i] = period[i % period.size()] / rms;
    return out;
}

TEST_CASE("T30 of decaying white noise in octave bands 250 Hz .. 4 kHz", "[measure][decay]") {
    // Periodic pseudo-random white noise (period 0.1 s) under an exponential envelope with
    // T60 = 1.5 s, and a steady Gaussian floor 80 dB below the start: every octave band decays at
    // the same known rate, so T30 = 1.5 s within 2 % (project requirement). Periodic noise has the
    // same band power in every period, so no realisation-to-realisation spread enters.
    const double t60_s = 1.5;
    const std::uint32_t seed = GENERATE(1u, 2u, 3u);
    const std::size_t n = static_cast<std::size_t>(3.0 * rate_hz);
    const std::vector<double> noise = periodic_white_noise(4800, n, seed);
    const std::vector<float> floor = decaying_noise(infinity, 3.0, seed + 100u);  // steady, RMS 0.1
    std::vector<float> x(n);
    const double floor_gain = std::pow(10.0, -80.0 / 20.0);
    for (std::size_t i = 0; i < n; ++i) {
        const double t = static_cast<double>(i) / rate_hz;
        x[i] = static_cast<float>(0.1 * std::pow(10.0, -3.0 * t / t60_s) * noise[i] +
                                  floor_gain * static_cast<double>(floor[i]));
    }
    for (const int index : {-2, -1, 0, 1, 2}) {  // 250, 500, 1k, 2k, 4k
        const octave_filter filter(octave_band_at(index), rate_hz);
        const decay_times d = measure_decay(filter.apply(x), rate_hz);
        INFO("seed " << seed << " band " << filter.band().nominal_hz << " Hz: T20 " << d.t20_s << " s, T30 "
                     << d.t30_s << " s, range " << d.dynamic_range_db << " dB, crosspoint "
                     << static_cast<double>(d.crosspoint.crosspoint_frames) / rate_hz << " s");
        CHECK(d.crosspoint.found);
        CHECK_THAT(d.t30_s, WithinRel(t60_s, 0.02));
        CHECK_THAT(d.t20_s, WithinRel(t60_s, 0.02));
    }
}

TEST_CASE("T30 of Gaussian decaying noise is unbiased over realisations", "[measure][decay]") {
    // Gaussian white noise is one random realisation each time: a single band's T30 spreads by a
    // few percent (measured up to 9 % at 250 Hz over 8 seeds), more in narrow bands. The mean over
    // 8 seeds must still be 1.5 s within 2 % in every band 250 Hz .. 4 kHz.
    const double t60_s = 1.5;
    for (const int index : {-2, -1, 0, 1, 2}) {
        const octave_filter filter(octave_band_at(index), rate_hz);
        double sum = 0.0;
        int count = 0;
        for (std::uint32_t seed = 1; seed <= 8; ++seed) {
            const decay_times d = measure_decay(filter.apply(decaying_noise(t60_s, 3.0, seed, -80.0)), rate_hz);
            INFO("band " << filter.band().nominal_hz << " Hz seed " << seed << ": T30 " << d.t30_s << " s");
            CHECK(!std::isnan(d.t30_s));
            sum += d.t30_s;
            ++count;
        }
        const double mean = sum / count;
        INFO("band " << filter.band().nominal_hz << " Hz: mean T30 " << mean << " s over " << count << " seeds");
        CHECK_THAT(mean, WithinRel(t60_s, 0.02));
    }
}

TEST_CASE("decay times are not reported without the noise margin", "[measure][decay]") {
    // Floor only 30 dB below the start: T30 needs 45 dB of range (ISO 3382-1:2009, from memory),
    // so it is NaN; T20 needs 35 dB, also NaN.
    const std::vector<float> x = decaying_noise(1.0, 2.0, 11u, -30.0);
    const decay_times d = measure_decay(x, rate_hz);
    CAPTURE(d.dynamic_range_db, d.t20_s, d.t30_s);
    CHECK(d.dynamic_range_db < 35.0);
    CHECK(std::isnan(d.t20_s));
    CHECK(std::isnan(d.t30_s));
    // A silent signal has no decay.
    const std::vector<float> silent(48000, 0.0f);
    CHECK_FALSE(measure_decay(silent, rate_hz).crosspoint.found);
}

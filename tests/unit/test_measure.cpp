// The comparison measures (src/measure): octave filters against IEC 61260-1:2014 and the exact
// Butterworth response, Schroeder decay against synthetic decays of known T60, spectral distances
// against exact gain ratios and FFTW, alignment against known delays.
#include <catch2/catch.hpp>

#include <fftw3.h>

#include <cmath>
#include <cstdint>
#include <vector>

#include "core/units.hpp"
#include "measure/align.hpp"
#include "measure/compare.hpp"
#include "measure/decay.hpp"
#include "measure/octave_filter.hpp"
#include "measure/spectral_distance.hpp"
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

/// A plucked-note stand-in: three partials with their own T60s and a short noise burst.
std::vector<float> test_note(double length_s) {
    splitmix64 gen{1234};
    const test::gaussian_draw<double> normal{0.0, 1.0};
    const std::size_t n = static_cast<std::size_t>(length_s * rate_hz);
    const std::size_t pre = 2400;  // 50 ms of silence before the onset
    std::vector<float> x(n, 0.0f);
    const double freqs_hz[] = {220.0, 440.5, 661.5};
    const double t60s_s[] = {2.0, 1.2, 0.7};
    const double amps[] = {0.3, 0.2, 0.1};
    for (std::size_t i = pre; i < n; ++i) {
        const double t = static_cast<double>(i - pre) / rate_hz;
        double v = 0.0;
        for (int p = 0; p < 3; ++p) v += amps[p] * std::pow(10.0, -3.0 * t / t60s_s[p]) * std::sin(two_pi * freqs_hz[p] * t);
        v += 0.05 * std::pow(10.0, -3.0 * t / 0.03) * normal(gen);
        x[i] = static_cast<float>(v);
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
    for (double f = band.exact_mid_hz / 16.0; f < 0.49 * fs; f *= 1.1) {
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
    fftw_complex* spec = fftw_alloc_complex(static_cast<std::size_t>(period_frames / 2 + 1));
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

TEST_CASE("spectral distance: self 0, a copy 6 dB quieter 6.0 dB", "[measure][spectral]") {
    const std::vector<float> a = test_note(1.0);
    const spectral_distance_result self = spectral_distance(a, a);
    CHECK(self.log_spectral_distance_db == 0.0);
    CHECK(self.spectral_convergence == 0.0);
    REQUIRE(self.per_resolution.size() == 4);
    CHECK(self.per_resolution[0].fft_size == 512);
    CHECK(self.per_resolution[3].hop_frames == 1024);

    const double gain = std::pow(10.0, -6.0 / 20.0);
    std::vector<float> b(a.size());
    for (std::size_t i = 0; i < a.size(); ++i) b[i] = static_cast<float>(gain * static_cast<double>(a[i]));
    const spectral_distance_result quieter = spectral_distance(a, b);
    CAPTURE(quieter.log_spectral_distance_db, quieter.spectral_convergence);
    // Every bin is 6 dB lower: exactly 6 dB and |1 - gain| = 0.49881 (project requirement: within 0.05 dB).
    CHECK_THAT(quieter.log_spectral_distance_db, WithinAbs(6.0, 0.05));
    CHECK_THAT(quieter.spectral_convergence, WithinAbs(1.0 - gain, 1e-5));
    for (const auto& r : quieter.per_resolution) {
        CAPTURE(r.fft_size, r.bins_used, r.stft_frames);
        CHECK(r.bins_used > 0);
        CHECK_THAT(r.log_spectral_distance_db, WithinAbs(6.0, 0.05));
    }
}

TEST_CASE("spectral distance matches a direct FFTW computation", "[measure][spectral]") {
    // Two different random signals, one resolution (N = 1024, hop 256, periodic Hann), frames
    // centred at 0, 256, ... < length; the definitions of spectral_distance.hpp computed with FFTW.
    splitmix64 gen{99};
    const test::gaussian_draw<double> normal{0.0, 1.0};
    const std::size_t len = 20000;
    std::vector<float> a(len), b(len);
    for (std::size_t i = 0; i < len; ++i) {
        a[i] = static_cast<float>(0.1 * normal(gen) * (1.0 + std::sin(0.001 * static_cast<double>(i))));
        b[i] = static_cast<float>(0.7 * static_cast<double>(a[i]) + 0.03 * normal(gen));
    }
    const int n = 1024, hop = 256;
    double* in = fftw_alloc_real(static_cast<std::size_t>(n));
    fftw_complex* out = fftw_alloc_complex(static_cast<std::size_t>(n / 2 + 1));
    fftw_plan plan = fftw_plan_dft_r2c_1d(n, in, out, FFTW_ESTIMATE);
    auto spectra = [&](const std::vector<float>& x) {
        std::vector<std::vector<double>> frames;
        for (std::size_t c = 0; c < len; c += hop) {
            for (int i = 0; i < n; ++i) {
                const long j = static_cast<long>(c) - n / 2 + i;
                const double v = j >= 0 && j < static_cast<long>(len) ? static_cast<double>(x[static_cast<std::size_t>(j)]) : 0.0;
                in[i] = v * (0.5 - 0.5 * std::cos(two_pi * i / n));
            }
            fftw_execute(plan);
            std::vector<double> p(static_cast<std::size_t>(n / 2 + 1));
            for (std::size_t k = 0; k < p.size(); ++k) p[k] = out[k][0] * out[k][0] + out[k][1] * out[k][1];
            frames.push_back(std::move(p));
        }
        return frames;
    };
    const auto pa = spectra(a), pb = spectra(b);
    fftw_destroy_plan(plan);
    fftw_free(in);
    fftw_free(out);
    double peak = 0.0;
    for (const auto& f : pa) for (double v : f) peak = std::max(peak, v);
    double sum_db = 0.0, err = 0.0, ref = 0.0;
    std::size_t used = 0;
    for (std::size_t f = 0; f < pa.size(); ++f) {
        for (std::size_t k = 0; k < pa[f].size(); ++k) {
            err += std::pow(std::sqrt(pa[f][k]) - std::sqrt(pb[f][k]), 2);
            ref += pa[f][k];
            if (pa[f][k] >= peak * 1e-6) {
                const double d = 10.0 * std::log10(std::max(pa[f][k], peak * 1e-10)) -
                                 10.0 * std::log10(std::max(pb[f][k], peak * 1e-10));
                sum_db += d * d;
                ++used;
            }
        }
    }
    const double lsd_ref = std::sqrt(sum_db / static_cast<double>(used));
    const double sc_ref = std::sqrt(err / ref);
    const spectral_distance_result r = spectral_distance(a, b, {.fft_sizes = {1024}});
    CAPTURE(lsd_ref, r.log_spectral_distance_db, sc_ref, r.spectral_convergence, used, r.per_resolution[0].bins_used);
    CHECK_THAT(r.log_spectral_distance_db, WithinRel(lsd_ref, 1e-3));
    CHECK_THAT(r.spectral_convergence, WithinRel(sc_ref, 1e-4));
    CHECK(r.per_resolution[0].stft_frames == pa.size());
}

TEST_CASE("onset alignment finds a known delay", "[measure][align]") {
    const std::vector<float> a = test_note(1.0);
    const std::ptrdiff_t delay = GENERATE(0, 1, 1234, -777, 13000);
    const double gain = GENERATE(1.0, 0.25);
    // b[n] = gain * a[n - delay]: b[n + delay] lines up with a[n].
    std::vector<float> b(a.size());
    for (std::size_t i = 0; i < b.size(); ++i) {
        const std::ptrdiff_t j = static_cast<std::ptrdiff_t>(i) - delay;
        b[i] = j >= 0 && j < static_cast<std::ptrdiff_t>(a.size()) ? static_cast<float>(gain * static_cast<double>(a[static_cast<std::size_t>(j)])) : 0.0f;
    }
    const alignment al = align_onsets(a, b, rate_hz);
    CAPTURE(delay, gain, al.lag_frames, al.coarse_lag_frames, al.waveform_correlation, al.onset_a_frames);
    CHECK(al.lag_frames == delay);
    CHECK_THAT(al.waveform_correlation, WithinAbs(1.0, 1e-6));
    // The test note starts after 50 ms of silence (2400 samples); onset within one envelope hop.
    CHECK(std::abs(static_cast<double>(al.onset_a_frames) - 2400.0) <= 48.0);
}

TEST_CASE("SNR over a window follows its definition", "[measure][snr]") {
    std::vector<float> a(1000), b(1000);
    for (std::size_t i = 0; i < a.size(); ++i) {
        a[i] = (i % 2 == 0) ? 0.5f : -0.5f;
        b[i] = a[i] + ((i % 2 == 0) ? 0.05f : -0.05f);  // error 0.05 everywhere: 20 log10(10) = 20 dB
    }
    CHECK_THAT(snr_db(a, b, 0, 1000), WithinAbs(20.0, 1e-5));
    CHECK(std::isinf(snr_db(a, a, 0, 1000)));
    const std::vector<float> zero(1000, 0.0f);
    CHECK(std::isnan(snr_db(zero, zero, 0, 1000)));
}

TEST_CASE("compare: self gives zero distance and equal decay times, 6 dB quieter gives 6 dB", "[measure][compare]") {
    const std::vector<float> a = test_note(2.5);
    const compare_result self = compare_signals(a, a, rate_hz);
    CHECK(self.align.lag_frames == 0);
    CHECK(self.whole.log_spectral_distance_db == 0.0);
    CHECK(self.early.log_spectral_distance_db == 0.0);
    CHECK(std::isinf(self.early_snr_db));
    // 63 Hz .. 8 kHz at 48 kHz: the 16 kHz band's upper edge (22.6 kHz) is above 0.9 * Nyquist.
    REQUIRE(self.bands.size() == 8);
    for (const auto& band : self.bands) {
        CAPTURE(band.band.nominal_hz, band.a.t20_s, band.a.t30_s);
        CHECK((band.a.t30_s == band.b.t30_s || (std::isnan(band.a.t30_s) && std::isnan(band.b.t30_s))));
        CHECK((band.a.t20_s == band.b.t20_s || (std::isnan(band.a.t20_s) && std::isnan(band.b.t20_s))));
    }

    const double gain = std::pow(10.0, -6.0 / 20.0);
    std::vector<float> b(a.size());
    for (std::size_t i = 0; i < a.size(); ++i) b[i] = static_cast<float>(gain * static_cast<double>(a[i]));
    const compare_result quieter = compare_signals(a, b, rate_hz);
    CAPTURE(quieter.whole.log_spectral_distance_db, quieter.early.log_spectral_distance_db, quieter.early_snr_db);
    CHECK(quieter.align.lag_frames == 0);
    CHECK_THAT(quieter.whole.log_spectral_distance_db, WithinAbs(6.0, 0.05));
    CHECK_THAT(quieter.early.log_spectral_distance_db, WithinAbs(6.0, 0.05));
    // b = g a: SNR = -20 log10(1 - g) = 6.04 dB.
    CHECK_THAT(quieter.early_snr_db, WithinAbs(-20.0 * std::log10(1.0 - gain), 1e-3));
    // The 220 Hz partial (T60 2 s) dominates the 250 Hz band: equal decay times in both, near 2 s.
    for (const auto& band : quieter.bands) {
        CAPTURE(band.band.nominal_hz, band.a.t30_s, band.b.t30_s);
        if (band.band.nominal_hz == 250.0) CHECK_THAT(band.a.t30_s, WithinRel(2.0, 0.03));
        if (!std::isnan(band.a.t30_s)) CHECK_THAT(band.b.t30_s, WithinRel(band.a.t30_s, 1e-3));
    }
}

TEST_CASE("spectral distance: bins above the band limit do not count", "[measure][spectral]") {
    // b = a + a strong 21 kHz tone. Up to 0.75 of Nyquist (18 kHz) the two differ only by the
    // tone's Hann-window leakage (sidelobes fall 18 dB per octave: far below 0.05 dB there);
    // over the whole band the tone's bins (far above a's level there) dominate. Frames are kept
    // inside the signal (centres 2048 .. N - 2048): a frame reaching past the ends cuts the tone
    // off abruptly, and that leaks everywhere.
    splitmix64 gen{5};
    const test::gaussian_draw<double> normal{0.0, 1.0};
    std::vector<float> a(24000), b(24000);
    for (std::size_t i = 0; i < a.size(); ++i) {
        a[i] = static_cast<float>(0.05 * normal(gen));
        b[i] = static_cast<float>(static_cast<double>(a[i]) + 0.5 * std::sin(two_pi * 21000.0 * static_cast<double>(i) / rate_hz));
    }
    const spectral_distance_result limited =
        spectral_distance(a, b, {.start_frames = 2048, .end_frames = 24000 - 2048, .band_limit_fraction = 0.75});
    const spectral_distance_result full = spectral_distance(a, b, {.start_frames = 2048, .end_frames = 24000 - 2048});
    CAPTURE(limited.log_spectral_distance_db, full.log_spectral_distance_db);
    CHECK(limited.log_spectral_distance_db < 0.05);
    CHECK(full.log_spectral_distance_db > 1.0);
}

// The comparison measures (src/measure): spectral distances against exact gain ratios and FFTW,
// alignment against known delays, the SNR over a window by its definition, and `compare` of a note
// with itself and with a copy 6 dB quieter.
#include <catch2/catch.hpp>

#include <fftw3.h>

#include <cmath>
#include <cstdint>
#include <vector>

#include "core/units.hpp"
#include "measure/align.hpp"
#include "measure/compare.hpp"
#include "measure/decay.hpp"
#include "measure/spectral_distance.hpp"
#include "test_signals.hpp"

using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;
using namespace wane;

namespace {

constexpr double rate_hz = 48000.0;

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

}  // namespace

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
    fftw_complex* out = fftw_alloc_complex(static_cast<std::size_t>(n) / 2 + 1);
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

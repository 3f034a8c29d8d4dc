// A patch's noise bands are the same sound at every render rate (synthesis/noise_render.hpp: the
// draw is made at 48 kHz times a power of two and converted): the same waveform where it can be
// compared sample by sample, the same band energies (FFTW as the reference transform) and the
// same peak, and the analysis's peak match judges the copy that a default render plays.
#include <catch2/catch.hpp>

#include <fftw3.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <span>
#include <vector>

#include "analysis/analyze.hpp"
#include "core/noise_bands.hpp"
#include "synthesis/noise_render.hpp"
#include "synthesis/render.hpp"

using namespace wane;

namespace {

constexpr double draw_rate_hz = 48000.0;

/// Bands of the layout (core/noise_bands.hpp) below max_hz with an attack of 2 ms and one decay
/// (T60 0.25 s), the lowest at first_db and each next one 1.5 dB lower: a struck note's residual.
std::vector<noise_band> decaying_bands(double max_hz, double first_db) {
    std::vector<noise_band> bands;
    double level = first_db;
    for (const band_edges& e : noise_band_layout(20000.0)) {
        if (e.low_hz >= max_hz) break;
        bands.push_back({.low_hz = e.low_hz, .high_hz = e.high_hz,
                         .env = {.attack_s = 0.002, .peak = level_db{level}, .decay = {{.t60_s = 0.25, .until_s = {}}}}});
        level -= 1.5;
    }
    return bands;
}

std::vector<float> noise_at(const std::vector<noise_band>& bands, double rate_hz, double length_s) {
    std::vector<float> out(static_cast<std::size_t>(std::lround(rate_hz * length_s)), 0.0f);
    add_noise_bands(bands, {.sample_rate_hz = rate_hz, .seed = 7}, out);
    return out;
}

/// Energy of x (rate_hz) between low_hz and high_hz in dB re 1 s at full scale, from the one-sided
/// rectangular-window DFT (Parseval: sum x^2 = (2 / N) sum_{0 < k < N/2} |X[k]|^2 for a signal
/// without DC), divided by the rate so that renders at different rates compare.
double band_energy_db(const std::vector<float>& x, double rate_hz, double low_hz, double high_hz) {
    const std::size_t n = x.size();
    std::vector<double> in(x.begin(), x.end());
    auto* spec = static_cast<fftw_complex*>(fftw_malloc(sizeof(fftw_complex) * (n / 2 + 1)));
    fftw_plan plan = fftw_plan_dft_r2c_1d(static_cast<int>(n), in.data(), spec, FFTW_ESTIMATE);
    fftw_execute(plan);
    double sum = 0.0;
    for (std::size_t k = 1; k < (n + 1) / 2; ++k) {
        const double f = static_cast<double>(k) * rate_hz / static_cast<double>(n);
        if (f >= low_hz && f < high_hz) sum += spec[k][0] * spec[k][0] + spec[k][1] * spec[k][1];
    }
    fftw_destroy_plan(plan);
    fftw_free(spec);
    return 10.0 * std::log10(2.0 * sum / static_cast<double>(n) / rate_hz);
}

double peak_db(const std::vector<float>& x) {
    float peak = 0.0f;
    for (float v : x) peak = std::max(peak, std::abs(v));
    return 20.0 * std::log10(static_cast<double>(peak));
}

/// SNR in dB of x (at rate_hz) against y (at y_rate_hz) read at the same times by linear
/// interpolation, over the times both cover.
double snr_against_interpolated_db(const std::vector<float>& x, double rate_hz, const std::vector<float>& y,
                                   double y_rate_hz) {
    double signal = 0.0, error = 0.0;
    for (std::size_t i = 0; i < x.size(); ++i) {
        const double pos = static_cast<double>(i) * y_rate_hz / rate_hz;
        const auto j = static_cast<std::size_t>(pos);
        if (j + 1 >= y.size()) break;
        const double frac = pos - static_cast<double>(j);
        const double yi = (1.0 - frac) * static_cast<double>(y[j]) + frac * static_cast<double>(y[j + 1]);
        const double d = static_cast<double>(x[i]) - yi;
        signal += yi * yi;
        error += d * d;
    }
    return 10.0 * std::log10(signal / error);
}

}  // namespace

TEST_CASE("noise is drawn at 48 kHz times a power of two at or above the render rate", "[noise][rates]") {
    CHECK(noise_draw_rate_hz(8000.0) == 48000.0);
    CHECK(noise_draw_rate_hz(44100.0) == 48000.0);
    CHECK(noise_draw_rate_hz(48000.0) == 48000.0);
    CHECK(noise_draw_rate_hz(88200.0) == 96000.0);
    CHECK(noise_draw_rate_hz(96000.0) == 96000.0);
    CHECK(noise_draw_rate_hz(192000.0) == 192000.0);
}

TEST_CASE("a 96 kHz noise render is the 48 kHz one at twice the rate", "[noise][rates]") {
    // Same bins in Hz, phases, frame times and shifts: the 96 kHz render's even samples are the
    // 48 kHz render's samples up to float rounding (bands below 20 kHz, under both Nyquists).
    const std::vector<noise_band> bands = decaying_bands(20000.0, -20.0);
    const std::vector<float> at48 = noise_at(bands, draw_rate_hz, 1.0);
    const std::vector<float> at96 = noise_at(bands, 2.0 * draw_rate_hz, 1.0);
    double signal = 0.0, error = 0.0;
    for (std::size_t i = 0; i < at48.size(); ++i) {
        const auto a = static_cast<double>(at48[i]);
        const double d = static_cast<double>(at96[2 * i]) - a;
        signal += a * a;
        error += d * d;
    }
    const double snr_db = 10.0 * std::log10(signal / error);
    CAPTURE(snr_db);
    CHECK(snr_db > 100.0);  // float rounding of the same arithmetic (measured 135 dB)
}

TEST_CASE("a low band's waveform at 44.1 kHz is the 48 kHz one resampled", "[noise][rates]") {
    // The bands under 141 Hz hold one or two bins each: drawn per render rate they were tones at
    // rate-dependent frequencies (a 44.1 kHz render against the 48 kHz one: SNR about 0 dB). At
    // 140 Hz, linear interpolation of the 48 kHz samples errs by (2 pi f / rate)^2 / 8 = 4e-5
    // (-88 dB); the converter's stated SNR is 97 dB; the bound leaves room for both.
    const std::vector<noise_band> bands = decaying_bands(141.0, -20.0);
    REQUIRE(bands.size() == 2);
    const std::vector<float> at48 = noise_at(bands, draw_rate_hz, 1.0);
    const std::vector<float> at44 = noise_at(bands, 44100.0, 1.0);
    const double snr_db = snr_against_interpolated_db(at44, 44100.0, at48, draw_rate_hz);
    CAPTURE(snr_db);
    CHECK(snr_db > 50.0);
}

TEST_CASE("a patch's noise has the same band energies and peak at 32, 44.1, 48 and 96 kHz", "[noise][rates]") {
    const double rate_hz = GENERATE(32000.0, 44100.0, 96000.0);
    CAPTURE(rate_hz);
    const std::vector<noise_band> bands = decaying_bands(20000.0, -20.0);
    const std::vector<float> ref = noise_at(bands, draw_rate_hz, 1.5);  // decays 100 dB by the end
    const std::vector<float> out = noise_at(bands, rate_hz, 1.5);
    // Band energies within 0.1 dB where the band ends under 0.9 of the render's Nyquist frequency
    // (the converter's passband, synthesis/rate_convert.hpp); a band reaching into its transition
    // (the 20 kHz band at 44.1 kHz: 17.8-20 kHz) within 1 dB; a band past it (at 32 kHz, the
    // 16 kHz band, cut at Nyquist) is not compared.
    const double passband_hz = 0.9 * 0.5 * rate_hz;
    for (const noise_band& b : bands) {
        if (b.low_hz >= passband_hz || b.high_hz > 1.1 * 0.5 * rate_hz) continue;
        const double ref_db = band_energy_db(ref, draw_rate_hz, b.low_hz, b.high_hz);
        const double out_db = band_energy_db(out, rate_hz, b.low_hz, b.high_hz);
        CAPTURE(b.low_hz, b.high_hz, ref_db, out_db);
        CHECK(std::abs(out_db - ref_db) < (b.high_hz > passband_hz ? 1.0 : 0.1));
    }
    // The peak: the same signal sampled at other times (inter-sample peaks of a noise whose
    // energy lies mostly below 1 kHz): within 0.2 dB.
    CAPTURE(peak_db(ref), peak_db(out));
    CHECK(std::abs(peak_db(out) - peak_db(ref)) < 0.2);
}

TEST_CASE("the peak match's gain holds for the default 48 kHz render of a 44.1 kHz note", "[noise][rates]") {
    // A plucked string's copy: one partial at 110 Hz and loud low noise bands. The gain brings
    // the copy's expected peak (the median of the draws' peaks at 48 kHz, analysis/peak_match.hpp)
    // within peak_tolerance_db of the recording's peak (-6 dBFS, recorded at 44.1 kHz); the
    // default render (48 kHz)
    // must peak where the default render at 44.1 kHz does, within 0.2 dB, as it plays the same
    // noise.
    patch p;
    p.note.length_s = 1.5;
    p.partials.push_back({.freq_hz = 110.0, .harmonic = 1, .phase_rad = 0.0,
                          .env = {.attack_s = 0.0, .peak = level_db{-12.0}, .decay = {{.t60_s = 1.0, .until_s = {}}}}});
    p.noise = decaying_bands(20000.0, -8.0);
    canonicalize(p);
    const double source_rate_hz = 44100.0;
    std::vector<float> note(static_cast<std::size_t>(source_rate_hz), 0.0f);
    note[100] = 0.5f;  // -6.02 dBFS
    const peak_match_params params{};
    p.note.gain_db = peak_matching_gain_db(p, note, source_rate_hz, params);
    std::vector<double> draws_db;
    draws_db.reserve(static_cast<std::size_t>(params.draws));
    for (int k = 0; k < params.draws; ++k)
        draws_db.push_back(peak_db(render_patch(p, {.sample_rate_hz = default_output_rate_hz,
                                                    .noise_seed = params.first_seed + static_cast<std::uint64_t>(k)})));
    std::sort(draws_db.begin(), draws_db.end());
    const double median_db = draws_db[draws_db.size() / 2];
    const double source_db = peak_db(render_patch(p, {.sample_rate_hz = source_rate_hz}));
    const double default_db = peak_db(render_patch(p, {.sample_rate_hz = default_output_rate_hz}));
    CAPTURE(p.note.gain_db, median_db, source_db, default_db);
    CHECK(std::abs(median_db - 20.0 * std::log10(0.5)) < peak_tolerance_db + 0.001);
    CHECK(std::abs(default_db - source_db) < 0.2);
}

TEST_CASE("noise draws rendered together are each bit for bit the render of its seed alone", "[noise][rates]") {
    // Bands with an attack burst, a fast decay (shaped sample by sample), a slow one and a kink,
    // at the draw rate and at a converted rate (44.1 kHz), over a length that ends mid-frame.
    std::vector<noise_band> bands = decaying_bands(8000.0, -20.0);
    bands.push_back({.low_hz = 2000.0, .high_hz = 4000.0,
                     .env = {.attack_s = 0.0005, .peak = level_db{-12.0},
                             .decay = {{.t60_s = 0.02, .until_s = 0.03}, {.t60_s = 1.5, .until_s = {}}}}});
    for (const double rate_hz : {draw_rate_hz, 44100.0}) {
        const auto length = static_cast<std::size_t>(std::lround(0.4123 * rate_hz));
        const std::vector<std::uint64_t> seeds = {2, 3, 5, 9};
        std::vector<float> together(seeds.size() * length, 0.0f);
        std::vector<std::span<float>> outs;
        for (std::size_t d = 0; d < seeds.size(); ++d) outs.emplace_back(together.data() + d * length, length);
        add_noise_band_draws(bands, {.sample_rate_hz = rate_hz, .seed = 1}, seeds, outs);
        for (std::size_t d = 0; d < seeds.size(); ++d) {
            std::vector<float> alone(length, 0.0f);
            add_noise_bands(bands, {.sample_rate_hz = rate_hz, .seed = seeds[d]}, alone);
            std::size_t differing = 0;
            double peak = 0.0;
            for (std::size_t n = 0; n < length; ++n) {
                differing += static_cast<std::size_t>(alone[n] != outs[d][n]);
                peak = std::max(peak, static_cast<double>(std::abs(alone[n])));
            }
            INFO("rate " << rate_hz << " Hz, seed " << seeds[d] << ": " << differing << " samples differ, peak " << peak);
            CHECK(differing == 0);
            CHECK(peak > 1e-3);  // a render with sound in it
        }
    }
}

// Spectral estimates: a sinusoid's frequency and level from the peak picker (a file written by sox,
// and white noise against the Cramer-Rao bound), the noise floor of white noise, and the order
// statistics the floor is read with against a full sort.
#include <catch2/catch.hpp>

#include <sndfile.h>

#include <algorithm>
#include <array>
#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <string>
#include <vector>

#include "core/order_select.hpp"
#include "core/rng.hpp"
#include "core/units.hpp"
#include "spectrum/peaks.hpp"
#include "spectrum/stft.hpp"
#include "spectrum/window.hpp"
#include "test_signals.hpp"

using Catch::Matchers::WithinAbs;
using namespace wane;

TEST_CASE("a sinusoid written by sox is found at its frequency and level", "[spectrum][sox]") {
    const auto kind = GENERATE(window_kind::hann, window_kind::hamming, window_kind::blackman_harris_4);
    const auto dir = std::filesystem::temp_directory_path() / ("wane_test_spectrum_" + std::to_string(::getpid()));
    std::filesystem::create_directories(dir);
    const auto path = dir / "s.wav";
    const std::string cmd = "sox -n -r 48000 -b 24 '" + path.string() + "' synth 2 sine 1234.5";
    REQUIRE(std::system(cmd.c_str()) == 0);
    SF_INFO info{};
    SNDFILE* f = sf_open(path.c_str(), SFM_READ, &info);
    REQUIRE(f != nullptr);
    std::vector<float> x(static_cast<std::size_t>(info.frames));
    REQUIRE(sf_readf_float(f, x.data(), info.frames) == info.frames);
    sf_close(f);
    std::filesystem::remove_all(dir);
    REQUIRE(info.samplerate == 48000);
    // sox's synth writes full scale; the true amplitude is the samples' peak (24-bit: 1 - 2^-23).
    float peak = 0.0f;
    for (float v : x) peak = std::max(peak, std::abs(v));
    const double expected_db = 20.0 * std::log10(double(peak));
    CAPTURE(peak, expected_db);
    CHECK(expected_db > -0.01);

    constexpr int window_length = 4801;  // 0.1 s
    const int fft_size = fast_fft_size(2 * window_length);
    stft_plan plan({.window = kind, .window_length = window_length, .fft_size = fft_size});
    plan.analyze(x, 48000);
    std::vector<spectral_peak> peaks;
    find_peaks(plan.power(), plan.bins(), plan.correction(), fft_size, 48000.0, nullptr,
               {.below_max_db = 30.0}, peaks);
    INFO("window " << window_name(kind) << ", fft " << fft_size);
    REQUIRE(peaks.size() == 1);
    CAPTURE(peaks[0].freq_hz, peaks[0].level_db);
    CHECK_THAT(peaks[0].freq_hz, WithinAbs(1234.5, 0.01));   // sox synth frequency
    CHECK_THAT(peaks[0].level_db, WithinAbs(expected_db, 0.05));
    // sox starts the sine at phase 0 (sin), i.e. cos phase -pi/2 at t = 0.
    const double expected_phase = std::remainder(two_pi * 1234.5 * 1.0 - pi / 2.0, two_pi);
    CAPTURE(peaks[0].phase_rad, expected_phase);
    CHECK_THAT(std::remainder(peaks[0].phase_rad - expected_phase, two_pi), WithinAbs(0.0, 0.01));
}

TEST_CASE("frequency error of a sinusoid in white noise stays within 2x the Cramer-Rao bound",
          "[spectrum][crb]") {
    // Hann and Hamming within 2x the bound. The Blackman-Harris window's own loss of precision is
    // sqrt(sum w^2 n^2 (N^3 / 12)) / sum w n^2 = 2.16 (high-SNR variance of the windowed peak
    // estimate, from memory; computed for this window), so it gets 2.5x. Hamming's far sidelobes
    // (-43 dB, falling 6 dB/octave) let the negative-frequency image bias the estimate by about
    // 0.005 Hz here, which exceeds the bound above 40 dB SNR, so Hamming is checked up to 40 dB.
    struct case_t {
        window_kind kind;
        double max_ratio;
        double snr_db;
    };
    const auto c = GENERATE(
        case_t{window_kind::hann, 2.0, 20.0}, case_t{window_kind::hann, 2.0, 30.0},
        case_t{window_kind::hann, 2.0, 40.0}, case_t{window_kind::hann, 2.0, 50.0},
        case_t{window_kind::hann, 2.0, 60.0}, case_t{window_kind::hamming, 2.0, 20.0},
        case_t{window_kind::hamming, 2.0, 30.0}, case_t{window_kind::hamming, 2.0, 40.0},
        case_t{window_kind::blackman_harris_4, 2.5, 20.0}, case_t{window_kind::blackman_harris_4, 2.5, 30.0},
        case_t{window_kind::blackman_harris_4, 2.5, 40.0}, case_t{window_kind::blackman_harris_4, 2.5, 50.0},
        case_t{window_kind::blackman_harris_4, 2.5, 60.0});
    const double snr_db = c.snr_db;
    constexpr int length = 1025;
    constexpr double fs = 48000.0;
    constexpr int trials = 200;
    const auto kind = c.kind;
    const int fft_size = fast_fft_size(2 * length);
    stft_plan plan({.window = kind, .window_length = length, .fft_size = fft_size});
    splitmix64 rng{20260101u + static_cast<unsigned>(snr_db)};
    const test::gaussian_draw<double> gauss{0.0, 1.0};
    const test::uniform_draw<double> uni{0.0, 1.0};
    const double amp = 0.5;
    // SNR = A^2 / (2 sigma^2).
    const double sigma = amp / std::sqrt(2.0 * std::pow(10.0, snr_db / 10.0));
    std::vector<float> x(length);
    std::vector<spectral_peak> peaks;
    double sum_sq = 0.0;
    int found = 0;
    for (int t = 0; t < trials; ++t) {
        const double f = 4000.0 + 500.0 * uni(rng);
        const double phi = two_pi * uni(rng);
        for (int n = 0; n < length; ++n)
            x[n] = static_cast<float>(amp * std::cos(two_pi * f * n / fs + phi) + sigma * gauss(rng));
        plan.analyze(x, length / 2);
        find_peaks(plan.power(), plan.bins(), plan.correction(), fft_size, fs, nullptr,
                   {.below_max_db = 10.0}, peaks);
        if (peaks.empty()) continue;
        const auto best = std::max_element(peaks.begin(), peaks.end(),
                                           [](auto& a, auto& b) { return a.level_db < b.level_db; });
        sum_sq += (best->freq_hz - f) * (best->freq_hz - f);
        ++found;
    }
    REQUIRE(found == trials);
    const double rms_hz = std::sqrt(sum_sq / trials);
    // Rife and Boorstyn 1974: var(omega) >= 12 / (SNR N (N^2 - 1)), omega in rad/sample.
    const double snr = std::pow(10.0, snr_db / 10.0);
    const double crb_hz = std::sqrt(12.0 / (snr * length * (double(length) * length - 1.0))) * fs / two_pi;
    INFO("window " << window_name(kind));
    CAPTURE(snr_db, rms_hz, crb_hz, rms_hz / crb_hz);
    CHECK(rms_hz <= c.max_ratio * crb_hz);
}

TEST_CASE("noise floor reads the mean noise power of white noise", "[spectrum][floor]") {
    // White Gaussian noise of variance s^2: E|X_k|^2 = s^2 sum w^2, on the sinusoid scale
    // (2 / sum w)^2 that is 4 s^2 sum w^2 / (sum w)^2 (exact ground truth of the estimator's target).
    constexpr int length = 2049;
    const int fft_size = fast_fft_size(2 * length);
    stft_plan plan({.window = window_kind::blackman_harris_4, .window_length = length, .fft_size = fft_size});
    splitmix64 rng{777};
    const test::gaussian_draw<float> gauss{0.0f, 0.01f};
    std::vector<float> x(48000);
    for (float& v : x) v = gauss(rng);
    double sw = 0.0, sw2 = 0.0;
    for (float v : plan.window_samples()) sw += double(v), sw2 += double(v) * double(v);
    const double expected_db = 10.0 * std::log10(4.0 * 1e-4 * sw2 / (sw * sw));
    noise_floor floor(fft_size / 2 + 1, 48000.0 / fft_size, 0.01);
    for (std::int64_t c = length; c + length < 48000; c += 480) {
        plan.analyze(x, c);
        floor.update(plan.power());
    }
    // One band's reading scatters: the 20% quantile of ~24 bins' powers has a relative standard
    // deviation of about sqrt(0.2 * 0.8 / 24) / 0.8 / 0.223 = 46 % (1.9 dB), and the running
    // average spans only a few independent frames (heavily overlapped windows), so about 1.2 dB
    // remain: 3 dB is 2.5 of those. The mean over many bands averages the scatter away: 0.5 dB.
    for (double f_hz : {500.0, 5000.0, 15000.0}) {
        CAPTURE(f_hz, floor.floor_db_at(f_hz), expected_db);
        CHECK_THAT(floor.floor_db_at(f_hz), WithinAbs(expected_db, 3.0));
    }
    double sum_db = 0.0;
    int bands = 0;
    for (double f_hz = 250.0; f_hz < 20000.0; f_hz += 250.0, ++bands) sum_db += floor.floor_db_at(f_hz);
    const double mean_db = sum_db / bands;
    CAPTURE(bands, mean_db, expected_db);
    CHECK_THAT(mean_db, WithinAbs(expected_db, 0.5));
}

TEST_CASE("select_order finds the same k-th and (k-1)-th smallest as a full sort, whatever the bracket",
          "[spectrum][order]") {
    // Reference: std::sort of a copy (exact order statistics, independent of the bracketing).
    const int n = GENERATE(1, 2, 7, 24, 25, 640, 1001);
    const int kind = GENERATE(0, 1, 2);  // exponential powers, quantized (ties), with zeros
    const double spread = GENERATE(1.0, 1.05, 1.3, 3.0);
    const double guess_scale = GENERATE(-1.0, 0.1, 0.7, 1.0, 1.4, 10.0);  // -1: no bracket
    splitmix64 rng{static_cast<std::uint64_t>(1000 * n + 10 * kind + 7)};
    std::vector<float> values(static_cast<std::size_t>(n));
    for (float& v : values) {
        double x = -std::log(rng.unit_open());  // a unit exponential: one noise bin's power
        if (kind == 1) x = std::floor(4.0 * x) / 4.0;
        if (kind == 2 && rng.unit() < 0.3) x = 0.0;
        v = static_cast<float>(x);
    }
    std::vector<float> sorted = values;
    std::sort(sorted.begin(), sorted.end());
    std::vector<float> scratch;
    for (const std::size_t k : {std::size_t{0}, static_cast<std::size_t>(n) / 5, static_cast<std::size_t>(n) / 2,
                                static_cast<std::size_t>(n) - 1}) {
        const bool want_below = k > 0;
        const order_bracket bracket =
            guess_scale < 0.0 ? order_bracket{} : bracket_around(static_cast<float>(guess_scale * static_cast<double>(sorted[k])), spread);
        std::vector<float> work = values;
        const order_values got = select_order(work, k, want_below, bracket, scratch);
        CAPTURE(n, kind, spread, guess_scale, k, bracket.low, bracket.high);
        CHECK(got.kth == sorted[k]);
        if (want_below) CHECK(got.below == sorted[k - 1]);
        std::sort(work.begin(), work.end());
        CHECK(work == sorted);  // reordered, nothing lost
    }
}

TEST_CASE("select_small_ranks finds each set's k-th smallest, as a full sort of that set does",
          "[spectrum][order]") {
    // Reference: std::sort of each set alone (exact order statistics). Sets of different kinds
    // side by side: exponential powers, quantized (ties), with zeros.
    const int count = GENERATE(1, 2, 5, 8, 19, 24, 100);
    const int k_wanted = GENERATE(0, 1, 3, 7);
    if (k_wanted >= count) return;
    const auto k = static_cast<std::size_t>(k_wanted);
    const auto n = static_cast<std::size_t>(count);
    splitmix64 rng{static_cast<std::uint64_t>(100 * count + k_wanted)};
    std::vector<float> values(n * rank_lanes);
    std::vector<std::vector<float>> sets(rank_lanes);
    for (std::size_t i = 0; i < n; ++i)
        for (std::size_t l = 0; l < rank_lanes; ++l) {
            double x = -std::log(rng.unit_open());
            if (l % 3 == 1) x = std::floor(4.0 * x) / 4.0;
            if (l % 3 == 2 && rng.unit() < 0.3) x = 0.0;
            values[i * rank_lanes + l] = static_cast<float>(x);
            sets[l].push_back(static_cast<float>(x));
        }
    std::array<float, rank_lanes> got{};
    select_small_ranks(values, n, k, got);
    for (std::size_t l = 0; l < rank_lanes; ++l) {
        std::sort(sets[l].begin(), sets[l].end());
        CAPTURE(count, k, l, got[l], sets[l][k]);
        CHECK(got[l] == sets[l][k]);
    }
}

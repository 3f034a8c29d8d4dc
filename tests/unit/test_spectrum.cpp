// Windows, STFT and spectral peaks, checked against published window tables, FFTW, sox and the
// Cramer-Rao bound.
#include <catch2/catch.hpp>

#include <fftw3.h>
#include <sndfile.h>

#include <algorithm>
#include <cmath>
#include <complex>
#include <cstdlib>
#include <filesystem>
#include <string>
#include <thread>
#include <vector>

#include "core/order_select.hpp"
#include "core/rng.hpp"
#include "core/units.hpp"
#include "spectrum/peaks.hpp"
#include "spectrum/stft.hpp"
#include "spectrum/window.hpp"
#include "test_signals.hpp"

using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;
using namespace wane;

namespace {

// |W(nu)| of a window's samples, nu in bins of its own length (DTFT, double precision).
double dtft_magnitude(const std::vector<float>& w, double nu_bins) {
    std::complex<double> sum{0.0, 0.0};
    const double step = -two_pi * nu_bins / double(w.size());
    for (std::size_t n = 0; n < w.size(); ++n) sum += double(w[n]) * std::polar(1.0, step * double(n));
    return std::abs(sum);
}

struct window_figures {
    double highest_sidelobe_db;
    double enbw_bins;
    double bandwidth_3db_bins;
    double scalloping_loss_db;
};

// The 3 dB bandwidth is the full width where the power response is half its peak:
// 10 log10(1/2) = -3.0103 dB.
constexpr double half_power_db = -3.0102999566;

window_figures measure_window(window_kind kind) {
    constexpr int length = 1024;
    const auto w = make_window(kind, length, window_symmetry::periodic);  // Harris's DFT-even form
    double sum = 0.0, sum2 = 0.0;
    for (float v : w) {
        sum += double(v);
        sum2 += double(v) * double(v);
    }
    const double w0 = dtft_magnitude(w, 0.0);
    const auto rel_db = [&](double nu) { return 20.0 * std::log10(dtft_magnitude(w, nu) / w0); };
    window_figures out{};
    out.enbw_bins = length * sum2 / (sum * sum);
    out.scalloping_loss_db = -rel_db(0.5);
    double lo = 0.0, hi = 2.0;  // the half-power point lies in the main lobe, below 2 bins here
    for (int i = 0; i < 60; ++i) {
        const double mid = 0.5 * (lo + hi);
        (rel_db(mid) > half_power_db ? lo : hi) = mid;
    }
    out.bandwidth_3db_bins = 2.0 * lo;
    // Highest sidelobe: past the first null of the main lobe, scan finely to 40 bins.
    constexpr double step = 0.005;
    double nu = step;
    double prev = rel_db(0.0);
    while (rel_db(nu) < prev) prev = rel_db(nu), nu += step;
    double highest = -infinity;
    for (auto i = std::lround(nu / step); static_cast<double>(i) * step < 40.0; ++i)
        highest = std::max(highest, rel_db(static_cast<double>(i) * step));
    out.highest_sidelobe_db = highest;
    return out;
}

/// The frame the STFT transforms, written out for the references: buf[m mod M] = w[h + m] x[c + m]
/// for m = -h..h (w the symmetric 4-term Blackman-Harris window of window_length = 2h + 1
/// samples, M = fft_size), zero elsewhere; computed in T.
template <typename T>
std::vector<T> zero_phase_frame(const std::vector<float>& x, int window_length, std::int64_t centre, int fft_size) {
    const auto w = make_window(window_kind::blackman_harris_4, window_length, window_symmetry::symmetric);
    const int h = window_length / 2;
    std::vector<T> buf(static_cast<std::size_t>(fft_size), T{0});
    for (int m = -h; m <= h; ++m)
        buf[static_cast<std::size_t>((m + fft_size) % fft_size)] =
            static_cast<T>(w[static_cast<std::size_t>(h + m)]) * static_cast<T>(x[static_cast<std::size_t>(centre + m)]);
    return buf;
}

}  // namespace

TEST_CASE("zero_phase_transform matches the direct cosine sum within 1e-12 of the window's sum", "[spectrum][window]") {
    // The reference: W(nu) = w[h] + 2 sum_m w[h + m] cos(2 pi nu m / N), each cosine by std::cos in
    // long double; zero_phase_transform rotates its cosines on between exact ones.
    const int length = GENERATE(193, 2617, 4001);
    const double nu = GENERATE(0.0, 0.5, 1.0, 3.7, 10.25, 40.0);
    const int fft_size = 2 * length + 6;
    const auto w = make_window(window_kind::blackman_harris_4, length, window_symmetry::symmetric);
    const auto h = static_cast<std::size_t>(length / 2);
    long double ref = w[h];
    long double abs_sum = w[h];
    for (std::size_t m = 1; m <= h; ++m) {
        const long double angle = 2.0L * std::acos(-1.0L) * static_cast<long double>(nu) * static_cast<long double>(m) / fft_size;
        ref += 2.0L * static_cast<long double>(w[h + m]) * std::cos(angle);
        abs_sum += 2.0L * std::abs(static_cast<long double>(w[h + m]));
    }
    const double got = zero_phase_transform(w, fft_size, nu);
    CAPTURE(length, nu, got, static_cast<double>(ref));
    CHECK(std::abs(static_cast<long double>(got) - ref) <= 1e-12L * abs_sum);
}

TEST_CASE("make_window's taps are window_value's cosine sum rounded to float, tap for tap", "[spectrum][window]") {
    // make_window sums the cosines from one cosine per tap (Chebyshev); the reference is the
    // plain sum, one std::cos per term. Lengths: every odd one to 3001 and the analysis's long ones
    // (tracker 2617 and 3491 at 48 kHz, its survey 19441, a heard-spectrum span).
    std::vector<int> lengths;
    for (int n = 3; n <= 3001; n += 2) lengths.push_back(n);
    for (int n : {2617, 3491, 4000, 8001, 19441, 48000}) lengths.push_back(n);
    for (const window_kind kind : {window_kind::hann, window_kind::hamming, window_kind::blackman_harris_4}) {
        for (const window_symmetry symmetry : {window_symmetry::symmetric, window_symmetry::periodic}) {
            std::size_t differ = 0, taps = 0;
            for (const int n : lengths) {
                const auto w = make_window(kind, n, symmetry);
                const double denom = symmetry == window_symmetry::symmetric ? n - 1.0 : double(n);
                for (int i = 0; i < n; ++i, ++taps)
                    if (w[static_cast<std::size_t>(i)] != static_cast<float>(window_value(kind, i / denom))) ++differ;
            }
            CAPTURE(window_name(kind), symmetry == window_symmetry::symmetric, taps);
            CHECK(differ == 0);
        }
    }
}

TEST_CASE("window figures match the published tables", "[spectrum][window]") {
    struct published {
        window_kind kind;
        // Heinzel, Ruediger and Schilling 2002, "Spectrum and spectral density estimation by the
        // DFT", window appendix: PSLL, NENBW, W3dB, emax (values from memory).
        double sidelobe_db, enbw_bins, bw3_bins, scallop_db;
        // Harris 1978, Table 1: highest sidelobe (rounded to 1 dB there, so not compared),
        // ENBW, 3.0 dB BW, scallop loss (values from memory).
        double harris_enbw, harris_bw3, harris_scallop_db;
    };
    const auto ref = GENERATE(
        published{window_kind::hann, -31.5, 1.5000, 1.4382, 1.4236, 1.50, 1.44, 1.42},
        published{window_kind::hamming, -42.7, 1.3628, 1.3008, 1.7514, 1.36, 1.30, 1.78},
        published{window_kind::blackman_harris_4, -92.0, 2.0044, 1.8962, 0.8256, 2.00, 1.90, 0.83});
    const window_figures got = measure_window(ref.kind);
    INFO("window " << window_name(ref.kind) << ": sidelobe " << got.highest_sidelobe_db << " dB, ENBW "
                   << got.enbw_bins << ", 3 dB BW " << got.bandwidth_3db_bins << ", scallop "
                   << got.scalloping_loss_db << " dB");
    CHECK_THAT(got.highest_sidelobe_db, WithinAbs(ref.sidelobe_db, 0.1));  // Heinzel et al. 2002
    CHECK_THAT(got.enbw_bins, WithinAbs(ref.enbw_bins, 0.01));              // Heinzel et al. 2002
    CHECK_THAT(got.bandwidth_3db_bins, WithinAbs(ref.bw3_bins, 0.01));      // Heinzel et al. 2002
    CHECK_THAT(got.scalloping_loss_db, WithinAbs(ref.scallop_db, 0.1));     // Heinzel et al. 2002
    CHECK_THAT(got.enbw_bins, WithinAbs(ref.harris_enbw, 0.01));            // Harris 1978, Table 1
    CHECK_THAT(got.bandwidth_3db_bins, WithinAbs(ref.harris_bw3, 0.01));    // Harris 1978, Table 1
    CHECK_THAT(got.scalloping_loss_db, WithinAbs(ref.harris_scallop_db, 0.1));  // Harris 1978, Table 1
}

TEST_CASE("STFT frame equals FFTW's transform of the same zero-phase frame", "[spectrum][stft]") {
    const int fft_size = GENERATE(2048, 2400, 4096);
    constexpr int window_length = 1001;
    constexpr std::int64_t centre = 1500;
    splitmix64 rng{12345};
    const test::uniform_draw<float> uni{-1.0f, 1.0f};
    std::vector<float> x(4000);
    for (float& v : x) v = uni(rng);

    stft_plan plan({.window = window_kind::blackman_harris_4, .window_length = window_length, .fft_size = fft_size});
    plan.analyze(x, centre);

    // Reference: FFTW (double) of the same zero-phase frame.
    const std::vector<double> frame = zero_phase_frame<double>(x, window_length, centre, fft_size);
    double* in = fftw_alloc_real(static_cast<std::size_t>(fft_size));
    fftw_complex* out = fftw_alloc_complex(static_cast<std::size_t>(fft_size) / 2 + 1);
    fftw_plan p = fftw_plan_dft_r2c_1d(fft_size, in, out, FFTW_ESTIMATE);
    std::copy(frame.begin(), frame.end(), in);
    fftw_execute(p);
    double max_ref = 0.0, max_diff = 0.0;
    const auto bins = plan.bins();
    REQUIRE(bins.size() == static_cast<std::size_t>(fft_size / 2 + 1));
    for (std::size_t k = 0; k < bins.size(); ++k) {
        const std::complex<double> ref{out[k][0], out[k][1]};
        const std::complex<double> got{bins[k].r, bins[k].i};
        max_ref = std::max(max_ref, std::abs(ref));
        max_diff = std::max(max_diff, std::abs(got - ref));
    }
    fftw_destroy_plan(p);
    fftw_free(in);
    fftw_free(out);
    CAPTURE(fft_size, max_diff, max_ref);
    CHECK(max_diff / max_ref < 1e-5);
    // And the power array is |X|^2 (2 / sum w)^2.
    const double k_scale = plan.amp_scale() * plan.amp_scale();
    CHECK_THAT(double(plan.power()[100]),
               WithinRel(k_scale * (double(bins[100].r) * double(bins[100].r) + double(bins[100].i) * double(bins[100].i)), 1e-5));
    // analyze_power: the same frame's power, bit for bit, near the edges too (samples past the
    // input read as 0), the bins left as they were.
    for (const std::int64_t c : {centre, std::int64_t{100}, std::int64_t{3900}}) {
        plan.analyze(x, c);
        const std::vector<float> want(plan.power().begin(), plan.power().end());
        const std::vector<kiss_fft_cpx> bins_before(plan.bins().begin(), plan.bins().end());
        plan.analyze(x, centre + 7);  // another frame in between
        const std::vector<kiss_fft_cpx> other_bins(plan.bins().begin(), plan.bins().end());
        plan.analyze_power(x, c);
        CAPTURE(c);
        CHECK(std::equal(want.begin(), want.end(), plan.power().begin(), plan.power().end()));
        CHECK(std::equal(other_bins.begin(), other_bins.end(), plan.bins().begin(), plan.bins().end(),
                         [](kiss_fft_cpx a, kiss_fft_cpx b) { return a.r == b.r && a.i == b.i; }));
        CHECK_FALSE(std::equal(bins_before.begin(), bins_before.end(), other_bins.begin(), other_bins.end(),
                               [](kiss_fft_cpx a, kiss_fft_cpx b) { return a.r == b.r && a.i == b.i; }));
    }
}

TEST_CASE("STFT bins equal a direct DFT in long double of the same zero-phase frame", "[spectrum][stft]") {
    // Independent of any FFT library (the STFT runs on FFTW, or KissFFT for few_frames):
    // X[k] = sum_n buf[n] exp(-i 2 pi k n / M).
    const int fft_size = GENERATE(2400, 5400, 8000);
    const bool few_frames = GENERATE(false, true);
    constexpr int window_length = 2001;
    constexpr std::int64_t centre = 2100;
    splitmix64 rng{777};
    const test::uniform_draw<float> uni{-1.0f, 1.0f};
    std::vector<float> x(4500);
    for (float& v : x) v = uni(rng);
    stft_plan plan({.window = window_kind::blackman_harris_4, .window_length = window_length, .fft_size = fft_size,
                    .few_frames = few_frames});
    plan.analyze(x, centre);
    const std::vector<long double> buf = zero_phase_frame<long double>(x, window_length, centre, fft_size);
    long double scale = 0.0L;
    for (const long double v : buf) scale += std::abs(v);
    const auto bins = plan.bins();
    for (int k = 0; k <= fft_size / 2; k += fft_size / 40 + 7) {
        std::complex<long double> ref{};
        for (int n = 0; n < fft_size; ++n) {
            const long double arg = -2.0L * 3.14159265358979323846264338327950288L * static_cast<long double>((static_cast<long long>(k) * n) % fft_size) /
                                    static_cast<long double>(fft_size);
            ref += buf[static_cast<std::size_t>(n)] * std::complex<long double>{std::cos(arg), std::sin(arg)};
        }
        const std::complex<long double> got{bins[static_cast<std::size_t>(k)].r, bins[static_cast<std::size_t>(k)].i};
        CAPTURE(fft_size, few_frames, k, static_cast<double>(std::abs(got - ref)), static_cast<double>(scale));
        // float samples through a float FFT: errors of a few float epsilons of sum |buf|.
        CHECK(std::abs(got - ref) < 1e-5L * scale);
    }
}

TEST_CASE("real_fft of a zero-padded block equals a direct DFT in long double", "[spectrum][stft]") {
    // X[k] = sum_{n < size} x[n] exp(-i 2 pi k n / M): the input padded with zeros to M points.
    const int fft_size = GENERATE(1000, 2400, 7290);
    const int size = GENERATE(1, 333, 1000);
    splitmix64 rng{4242};
    const test::uniform_draw<float> uni{-1.0f, 1.0f};
    std::vector<float> x(static_cast<std::size_t>(size));
    for (float& v : x) v = uni(rng);
    std::vector<std::complex<float>> bins(static_cast<std::size_t>(fft_size) / 2 + 1);
    real_fft(x, fft_size, bins);
    long double scale = 0.0L;
    for (const float v : x) scale += std::abs(static_cast<long double>(v));
    for (int k = 0; k <= fft_size / 2; k += fft_size / 40 + 3) {
        std::complex<long double> ref{};
        for (int n = 0; n < size; ++n) {
            const long double arg = -2.0L * 3.14159265358979323846264338327950288L *
                                    static_cast<long double>((static_cast<long long>(k) * n) % fft_size) /
                                    static_cast<long double>(fft_size);
            ref += static_cast<long double>(x[static_cast<std::size_t>(n)]) * std::complex<long double>{std::cos(arg), std::sin(arg)};
        }
        const std::complex<long double> got{bins[static_cast<std::size_t>(k)].real(), bins[static_cast<std::size_t>(k)].imag()};
        CAPTURE(fft_size, size, k, static_cast<double>(std::abs(got - ref)), static_cast<double>(scale));
        // float samples through a float FFT: errors of a few float epsilons of sum |x|.
        CHECK(std::abs(got - ref) < 1e-5L * scale);
    }
}

TEST_CASE("inverse_real_fft equals a direct inverse DFT in long double of a Hermitian spectrum", "[spectrum][stft]") {
    // y[n] = X[0] + X[M/2] (-1)^n + 2 Re sum_{0 < k < M/2} X[k] exp(+i 2 pi k n / M), unnormalized.
    const int fft_size = GENERATE(1024, 2048, 2400);
    splitmix64 rng{9191};
    const test::uniform_draw<float> uni{-1.0f, 1.0f};
    inverse_real_fft inverse(fft_size);
    const inverse_real_fft again(fft_size);  // a second object of the size shares the plan
    const auto half = static_cast<std::size_t>(fft_size / 2);
    std::vector<std::complex<long double>> spectrum(half + 1);
    for (std::size_t k = 0; k <= half; ++k) {
        const bool real_only = k == 0 || k == half;
        spectrum[k] = {uni(rng), real_only ? 0.0f : uni(rng)};
        inverse.spectrum()[k] = {static_cast<float>(spectrum[k].real()), static_cast<float>(spectrum[k].imag())};
    }
    std::vector<float> y(static_cast<std::size_t>(fft_size));
    inverse.run(y);
    long double scale = 0.0L;
    for (const auto& v : spectrum) scale += 2.0L * std::abs(v);
    for (int n = 0; n < fft_size; n += fft_size / 50 + 3) {
        long double ref = spectrum[0].real() + spectrum[half].real() * (n % 2 == 0 ? 1.0L : -1.0L);
        for (std::size_t k = 1; k < half; ++k) {
            const long double arg = 2.0L * 3.14159265358979323846264338327950288L *
                                    static_cast<long double>((static_cast<long long>(k) * n) % fft_size) /
                                    static_cast<long double>(fft_size);
            ref += 2.0L * (spectrum[k] * std::complex<long double>{std::cos(arg), std::sin(arg)}).real();
        }
        CAPTURE(fft_size, n, static_cast<double>(y[static_cast<std::size_t>(n)]), static_cast<double>(ref), static_cast<double>(scale));
        // float bins through a float FFT: errors of a few float epsilons of the sum of |X|.
        CHECK(std::abs(static_cast<long double>(y[static_cast<std::size_t>(n)]) - ref) < 1e-5L * scale);
    }
}

TEST_CASE("real_fft's bins are bit-equal to a plain FFTW_ESTIMATE plan's (its planner flags leave the plan alone)",
          "[spectrum][stft]") {
    // The sizes one analysis of a 48 kHz note plans (tracker, noise model, heard spectrum, onset)
    // and a few others; real_fft plans without the buffered solvers (spectrum/stft.cpp).
    const int fft_size = GENERATE(16, 400, 1000, 5400, 7200, 7290, 8000, 10800, 19440, 44100 * 2, 384000);
    splitmix64 rng{777};
    const test::uniform_draw<float> uni{-1.0f, 1.0f};
    std::vector<float> x(static_cast<std::size_t>(fft_size) * 3 / 4);
    for (float& v : x) v = uni(rng);
    const auto bins_count = static_cast<std::size_t>(fft_size) / 2 + 1;
    std::vector<std::complex<float>> got(bins_count);
    real_fft(x, fft_size, got);
    // The reference: FFTW_ESTIMATE as documented, nothing else, on the same zero-padded block.
    float* in = fftwf_alloc_real(static_cast<std::size_t>(fft_size));
    fftwf_complex* out = fftwf_alloc_complex(bins_count);
    REQUIRE(in != nullptr);
    REQUIRE(out != nullptr);
    fftwf_plan plan = fftwf_plan_dft_r2c_1d(fft_size, in, out, FFTW_ESTIMATE);
    REQUIRE(plan != nullptr);
    std::fill(in, in + fft_size, 0.0f);
    std::copy(x.begin(), x.end(), in);
    fftwf_execute(plan);
    std::size_t differ = 0;
    for (std::size_t k = 0; k < bins_count; ++k)
        if (got[k].real() != out[k][0] || got[k].imag() != out[k][1]) ++differ;
    fftwf_destroy_plan(plan);
    fftwf_free(in);
    fftwf_free(out);
    CAPTURE(fft_size, bins_count);
    CHECK(differ == 0);
}

TEST_CASE("STFT plans made and run in two threads at once give the bins of a plan run alone", "[spectrum][stft]") {
    std::vector<float> x(9000);
    splitmix64 rng{99};
    const test::uniform_draw<float> uni{-1.0f, 1.0f};
    for (float& v : x) v = uni(rng);
    const stft_config config{.window = window_kind::hann, .window_length = 3001, .fft_size = 7290};
    stft_plan alone(config);
    alone.analyze(x, 4000);
    const std::vector<kiss_fft_cpx> want(alone.bins().begin(), alone.bins().end());
    std::vector<std::vector<kiss_fft_cpx>> got(2);
    auto run = [&](std::size_t t) {
        for (int rep = 0; rep < 20; ++rep) {  // plans made and destroyed while the other thread does the same
            stft_plan plan(config);
            plan.analyze(x, 4000);
            got[t].assign(plan.bins().begin(), plan.bins().end());
        }
    };
    std::thread a(run, 0), b(run, 1);
    a.join();
    b.join();
    for (const auto& g : got) {
        REQUIRE(g.size() == want.size());
        std::size_t differ = 0;
        for (std::size_t k = 0; k < g.size(); ++k) differ += (g[k].r != want[k].r || g[k].i != want[k].i) ? 1 : 0;
        CAPTURE(differ);
        CHECK(differ == 0);
    }
}

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

// Windows and the STFT, checked against published window tables, FFTW and direct DFTs in long
// double (spectral peaks, the noise floor and order statistics: test_spectrum_estimates.cpp).
#include <catch2/catch.hpp>

#include <fftw3.h>

#include <algorithm>
#include <cmath>
#include <complex>
#include <limits>
#include <string>
#include <thread>
#include <vector>

#include "core/cosine_walk.hpp"
#include "core/rng.hpp"
#include "core/units.hpp"
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
    for (int m = -h; m <= h; ++m) {
        const int tap = h + m;
        buf[static_cast<std::size_t>((m + fft_size) % fft_size)] =
            static_cast<T>(w[static_cast<std::size_t>(tap)]) * static_cast<T>(x[static_cast<std::size_t>(centre + m)]);
    }
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

TEST_CASE("cosine_walk_table gives cosine_walk's values bit for bit, near long double's", "[spectrum][window]") {
    // Two references: the walk itself, value by value (the table walks four stretches side by
    // side and must give the same bits), and std::cos / std::sin in long double, within 1e-12
    // plus what rounding the angle to double moves it (4 eps |angle|: the walk's exact anchors
    // take the angle in double).
    const std::size_t count = GENERATE(0U, 1U, 15U, 16U, 63U, 64U, 65U, 200U, 7200U);
    const double num = GENERATE(0.1234, two_pi, 3.0), den = GENERATE(1.0, 1000.0);
    std::vector<double> cos_n(count), sin_n(count);
    cosine_walk_table(num, den, cos_n, sin_n);
    cosine_walk walk(num, den);
    for (std::size_t j = 0; j < count; ++j) {
        const double c = walk.next(), s = walk.sine();
        const long double angle = static_cast<long double>(num) * static_cast<long double>(j) / static_cast<long double>(den);
        CAPTURE(count, num, den, j, cos_n[j], c, sin_n[j], s);
        REQUIRE(cos_n[j] == c);
        REQUIRE(sin_n[j] == s);
        const long double tol = 1e-12L + 4.0L * std::numeric_limits<double>::epsilon() * angle;
        REQUIRE(std::abs(static_cast<long double>(c) - std::cos(angle)) <= tol);
        REQUIRE(std::abs(static_cast<long double>(s) - std::sin(angle)) <= tol);
    }
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

TEST_CASE("make_window asked again for a window, after other windows in between, gives window_value's taps", "[spectrum][window]") {
    // make_window keeps the last few windows of the thread: the window asked again is found there
    // or (after more windows than it keeps) made anew. Either way its taps are the plain cosine
    // sums rounded to float, and changing a copy leaves the next one whole.
    const int between = GENERATE(0, 1, 7, 8, 9, 20);
    const int n = 2617;
    auto first = make_window(window_kind::blackman_harris_4, n, window_symmetry::symmetric);
    first.front() = 1.0F;  // a caller's change of its copy
    for (int k = 0; k < between; ++k) (void)make_window(window_kind::hann, 101 + 2 * k, window_symmetry::periodic);
    const auto again = make_window(window_kind::blackman_harris_4, n, window_symmetry::symmetric);
    REQUIRE(again.size() == static_cast<std::size_t>(n));
    std::size_t differ = 0;
    for (int i = 0; i < n; ++i)
        if (again[static_cast<std::size_t>(i)] != static_cast<float>(window_value(window_kind::blackman_harris_4, i / (n - 1.0)))) ++differ;
    CAPTURE(between, again.front());
    CHECK(differ == 0);
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

TEST_CASE("real_fft's bins are bit-equal to a plain FFTW_ESTIMATE plan's (its planner flags leave the plan alone), also on a size's plan made by an earlier call",
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
    // A first call of the size on other samples makes the size's plan; the second runs it again.
    const std::vector<float> other(x.size() / 2, 0.25f);
    real_fft(other, fft_size, got);
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

// Modes stage: geometric sums, complex amplitudes by least squares, ESPRIT poles and the subband
// search (the eigenvalues of ESPRIT's rotation: test_complex_eigenvalues.cpp). References: direct summation in long double, a dense QR least squares built from the
// explicit columns (Eigen's Householder QR, not the closed-form Gram), and the exact parameters
// of synthetic signals.
#include <catch2/catch.hpp>

#include <cmath>
#include <complex>
#include <limits>
#include <span>
#include <vector>

#include <Eigen/Dense>

#include "core/units.hpp"
#include "modes/damped_mode.hpp"
#include "modes/esprit.hpp"
#include "modes/mode_shape.hpp"
#include "core/envelope.hpp"
#include "modes/subband_modes.hpp"
#include "core/rng.hpp"

using namespace wane;
using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;

namespace {

std::vector<float> render_modes(const std::vector<damped_mode>& modes, double fs, std::size_t n,
                                double noise_rms = 0.0, std::uint64_t seed = 1) {
    std::vector<float> x(n);
    for (std::size_t i = 0; i < n; ++i) {
        const double t = static_cast<double>(i) / fs;
        double v = 0.0;
        for (const auto& m : modes)
            v += std::real(m.amp * std::exp(std::complex<double>(-m.decay_per_s * t, two_pi * m.freq_hz * t)));
        // Uniform noise of the given RMS from the project's own generator: sqrt(3) * U[-1, 1).
        if (noise_rms > 0.0) v += noise_rms * std::sqrt(3.0) * hashed_signed(seed, 0, i);
        x[i] = static_cast<float>(v);
    }
    return x;
}

/// The reference least squares: explicit columns Re z^n and -Im z^n of every mode (z = exp((-d +
/// 2 pi i f) / fs)), solved by Eigen's Householder QR; the unknowns are (Re c_k, Im c_k) per mode.
struct dense_fit {
    Eigen::VectorXd amps;
    double residual = 0.0;  ///< |A amps - x|^2 / |x|^2
};
dense_fit dense_qr_amplitudes(std::span<const float> x, double fs, const std::vector<damped_mode>& modes) {
    const auto n = static_cast<Eigen::Index>(x.size());
    Eigen::MatrixXd a(n, static_cast<Eigen::Index>(2 * modes.size()));
    Eigen::VectorXd b(n);
    for (Eigen::Index i = 0; i < n; ++i) {
        const double t = static_cast<double>(i) / fs;
        for (std::size_t k = 0; k < modes.size(); ++k) {
            const auto z = std::exp(std::complex<double>(-modes[k].decay_per_s * t, two_pi * modes[k].freq_hz * t));
            a(i, static_cast<Eigen::Index>(2 * k)) = z.real();
            a(i, static_cast<Eigen::Index>(2 * k + 1)) = -z.imag();
        }
        b(i) = x[static_cast<std::size_t>(i)];
    }
    dense_fit out{.amps = a.householderQr().solve(b)};
    out.residual = (a * out.amps - b).squaredNorm() / b.squaredNorm();
    return out;
}

}  // namespace

TEST_CASE("geometric_sum equals direct summation, also near a = 0 and across 2 pi", "[modes]") {
    const double re = GENERATE(0.0, -1e-9, -1e-5, -0.01, 0.003);
    const double im = GENERATE(0.0, 1e-10, 0.3, 3.1, two_pi, two_pi + 1e-7, -2.0);
    const double count = 1000.0;
    std::complex<long double> direct = 0.0L;
    for (int n = 0; n < 1000; ++n)
        direct += std::exp(std::complex<long double>(static_cast<long double>(re) * n, static_cast<long double>(im) * n));
    const std::complex<double> got = geometric_sum({re, im}, count);
    const std::complex<double> want(static_cast<double>(direct.real()), static_cast<double>(direct.imag()));
    CAPTURE(re, im, got, want);
    CHECK(std::abs(got - want) <= 1e-9 * std::max(1.0, std::abs(want)));
}

TEST_CASE("complex amplitudes of known damped modes are recovered exactly", "[modes]") {
    const double fs = 44100.0;
    std::vector<damped_mode> truth{{.freq_hz = 220.0, .decay_per_s = 3.0, .amp = std::polar(0.5, 0.7)},
                                   {.freq_hz = 223.0, .decay_per_s = 20.0, .amp = std::polar(0.2, -2.0)},
                                   {.freq_hz = 1375.5, .decay_per_s = 150.0, .amp = std::polar(0.3, 2.5)},
                                   {.freq_hz = 9000.0, .decay_per_s = 0.0, .amp = std::polar(0.01, 0.0)}};
    const auto x = render_modes(truth, fs, 6615);
    auto modes = truth;
    for (auto& m : modes) m.amp = {};
    const double residual = fit_mode_amplitudes(x, fs, modes);
    CAPTURE(residual);
    CHECK(residual < 1e-12);
    for (std::size_t k = 0; k < truth.size(); ++k) {
        CAPTURE(k, modes[k].amp, truth[k].amp);
        // float samples: 1e-7 relative rounding of x
        CHECK(std::abs(modes[k].amp - truth[k].amp) < 2e-6 * std::abs(truth[k].amp) + 1e-7);
    }
}

TEST_CASE("complex amplitudes match a dense QR least squares on noisy data", "[modes]") {
    const double fs = 32000.0;
    const std::size_t n = 3000;
    std::vector<damped_mode> modes{{.freq_hz = 100.0, .decay_per_s = 5.0, .amp = {0.4, 0.1}},
                                   {.freq_hz = 740.0, .decay_per_s = 60.0, .amp = {-0.1, 0.2}},
                                   {.freq_hz = 2210.0, .decay_per_s = 30.0, .amp = {0.05, 0.0}}};
    const auto x = render_modes(modes, fs, n, 0.05, 7);
    const dense_fit dense = dense_qr_amplitudes(x, fs, modes);
    const Eigen::VectorXd& ref = dense.amps;
    fit_mode_amplitudes(x, fs, modes);
    for (std::size_t k = 0; k < modes.size(); ++k) {
        const std::complex<double> want(ref(static_cast<Eigen::Index>(2 * k)), ref(static_cast<Eigen::Index>(2 * k + 1)));
        CAPTURE(k, modes[k].amp, want);
        CHECK(std::abs(modes[k].amp - want) < 1e-8);
    }
}

TEST_CASE("amplitudes of many modes, close pairs and pairs near Nyquist among them, match a dense QR least squares",
          "[modes]") {
    // The Gram matrix takes a product form for pairs whose E = z_j z_k (or z_j conj z_k) lies at
    // least 1e-3 from 1 and the closed form below that: modes 0.5-20 Hz apart and modes near
    // Nyquist put pairs on both sides of the switch.
    const std::uint64_t seed = GENERATE(1u, 2u, 3u, 4u);
    const double fs = 48000.0;
    const std::size_t n = 4000;
    splitmix64 rng{seed};
    std::vector<damped_mode> modes;
    for (int k = 0; k < 6; ++k) {
        const double f = rng.uniform(60.0, 20000.0);
        const double d = rng.uniform(0.0, 200.0);
        modes.push_back({.freq_hz = f, .decay_per_s = d, .amp = std::polar(rng.uniform(0.01, 0.3), rng.uniform(-pi, pi))});
        modes.push_back({.freq_hz = f + rng.uniform(0.5, 20.0), .decay_per_s = rng.uniform(0.0, 200.0),
                         .amp = std::polar(rng.uniform(0.01, 0.3), rng.uniform(-pi, pi))});
    }
    modes.push_back({.freq_hz = 0.5 * fs - 3.0, .decay_per_s = 10.0, .amp = {0.01, 0.02}});
    modes.push_back({.freq_hz = 0.5 * fs - 40.0, .decay_per_s = 30.0, .amp = {-0.02, 0.01}});
    const auto x = render_modes(modes, fs, n, 0.02, seed);
    const dense_fit dense = dense_qr_amplitudes(x, fs, modes);
    const Eigen::VectorXd& ref = dense.amps;
    const double residual = fit_mode_amplitudes(x, fs, modes);
    const double ref_residual = dense.residual;
    CAPTURE(seed, residual, ref_residual);
    CHECK_THAT(residual, WithinRel(ref_residual, 1e-6));
    for (std::size_t k = 0; k < modes.size(); ++k) {
        const std::complex<double> want(ref(static_cast<Eigen::Index>(2 * k)), ref(static_cast<Eigen::Index>(2 * k + 1)));
        CAPTURE(k, modes[k].freq_hz, modes[k].amp, want);
        CHECK(std::abs(modes[k].amp - want) < 1e-7 * std::max(1.0, std::abs(want)));
    }
}

TEST_CASE("ESPRIT finds the poles of a noiseless sum of damped exponentials", "[modes]") {
    const std::vector<std::complex<double>> poles{std::polar(0.99, 0.3), std::polar(0.95, -1.2), std::polar(0.999, 2.0)};
    const std::vector<std::complex<double>> amps{{1.0, 0.0}, {0.3, 0.4}, {0.05, -0.02}};
    std::vector<std::complex<double>> y(200);
    for (std::size_t n = 0; n < y.size(); ++n)
        for (std::size_t k = 0; k < poles.size(); ++k) y[n] += amps[k] * std::pow(poles[k], static_cast<double>(n));
    const auto got = esprit_poles(y, {.dimension = 30, .max_order = 10});
    REQUIRE(got.size() == poles.size());
    for (const auto& want : poles) {
        double best = 1.0;
        for (const auto& g : got) best = std::min(best, std::abs(g - want));
        CAPTURE(want, best);
        CHECK(best < 1e-8);
    }
}

TEST_CASE("ESPRIT by order gives, at each order, the poles of ESPRIT at that fixed order, and a noiseless sum's poles",
          "[modes]") {
    // The reference is the header's promise: esprit_poles_by_order's entry r - 1 equals
    // esprit_poles(y, {.dimension, .max_order = r, .fixed_order = r}) up to rounding (its
    // eigenvectors come by inverse iteration, the reference's from Eigen's tridiagonal QR).
    const std::vector<std::complex<double>> poles{std::polar(0.995, 0.31), std::polar(0.97, 0.36), std::polar(0.999, -0.2)};
    const std::vector<std::complex<double>> amps{{1.0, 0.0}, {0.3, 0.4}, {0.2, -0.1}};
    const std::uint64_t seed = GENERATE(1, 2, 3);
    const double noise = GENERATE(0.0, 1e-3);  // none, or uniform noise 60 dB under the strongest mode
    std::vector<std::complex<double>> y(300);
    for (std::size_t n = 0; n < y.size(); ++n) {
        for (std::size_t k = 0; k < poles.size(); ++k) y[n] += amps[k] * std::pow(poles[k], static_cast<double>(n));
        y[n] += noise * std::complex<double>{hashed_signed(seed, 0, n), hashed_signed(seed, 1, n)};
    }
    constexpr int dimension = 40, max_order = 3;
    const auto by_order = esprit_poles_by_order(y, dimension, max_order);
    REQUIRE(by_order.size() == max_order);
    for (int r = 1; r <= max_order; ++r) {
        const auto want = esprit_poles(y, {.dimension = dimension, .max_order = r, .fixed_order = r});
        const auto& got = by_order[static_cast<std::size_t>(r - 1)];
        REQUIRE(got.size() == want.size());
        for (const auto& w : want) {
            double best = 1.0;
            for (const auto& g : got) best = std::min(best, std::abs(g - w));
            CAPTURE(seed, noise, r, w, best);
            CHECK(best < 1e-9);  // our tolerance: rounding of two eigenvector methods on a 40 x 40 problem
        }
    }
    if (noise > 0.0) return;
    for (const auto& want : poles) {  // order 3 of the noiseless sum: its poles, exactly
        double best = 1.0;
        for (const auto& g : by_order[2]) best = std::min(best, std::abs(g - want));
        CAPTURE(seed, want, best);
        CHECK(best < 1e-8);
    }
}

TEST_CASE("subband search finds a short mode of a struck bar among long partials", "[modes]") {
    const double fs = 48000.0;
    // Long partials at 440 and 1760 Hz and a short mode (T60 30 ms) at 1213 Hz, 10 dB under the
    // fundamental, plus noise 80 dB under the fundamental.
    const double t60 = 0.03;
    std::vector<damped_mode> truth{{.freq_hz = 440.0, .decay_per_s = ln1000 / 1.5, .amp = std::polar(0.5, 0.2)},
                                   {.freq_hz = 1213.0, .decay_per_s = ln1000 / t60, .amp = std::polar(0.5 * std::pow(10.0, -0.5), 1.0)},
                                   {.freq_hz = 1760.0, .decay_per_s = ln1000 / 0.8, .amp = std::polar(0.2, -0.4)}};
    const auto x = render_modes(truth, fs, 9600, 0.5e-4, 3);
    const auto found = find_subband_modes(x, fs, {.band_hz = 1000.0});
    for (const auto& want : truth) {
        const damped_mode* best = nullptr;
        for (const auto& f : found)
            if (!best || std::abs(f.freq_hz - want.freq_hz) < std::abs(best->freq_hz - want.freq_hz)) best = &f;
        REQUIRE(best != nullptr);
        CAPTURE(want.freq_hz, best->freq_hz, want.decay_per_s, best->decay_per_s);
        CHECK_THAT(best->freq_hz, WithinAbs(want.freq_hz, 0.5));
        CHECK_THAT(best->decay_per_s, WithinRel(want.decay_per_s, 0.05));
    }
}

TEST_CASE("moment sums m^p exp(m mu) equal direct summation, also near mu = 0 and across 2 pi", "[modes]") {
    const int power = GENERATE(0, 1, 2);
    const double re = GENERATE(0.0, -1e-9, -1e-6, -0.01, 0.002);
    const double im = GENERATE(0.0, 1e-10, 1e-7, 0.3, 3.1, two_pi + 1e-8, -2.0);
    const int count = 777;
    std::complex<long double> direct = 0.0L;
    for (int m = 0; m < count; ++m)
        direct += std::pow(static_cast<long double>(m), power) *
                  std::exp(std::complex<long double>(static_cast<long double>(re) * m, static_cast<long double>(im) * m));
    const std::complex<double> got = moment_geometric_sum(power, {re, im}, count);
    const std::complex<double> want(static_cast<double>(direct.real()), static_cast<double>(direct.imag()));
    CAPTURE(power, re, im, got, want);
    CHECK(std::abs(got - want) <= 1e-9 * std::max(1.0, std::abs(want)));
}

TEST_CASE("closed-form sums of two envelope shapes equal direct summation of their samples", "[modes]") {
    const double fs = 48000.0;
    const std::size_t count = 7200;
    // An attack ramp then two straight dB segments (one rising), and a plain decaying mode.
    const envelope slow{.attack_s = 0.0312, .peak = level_db{-12.0},
                        .decay = {{.t60_s = 0.4, .until_s = 0.07}, {.t60_s = -3.0, .until_s = 0.11}, {.t60_s = 2.0, .until_s = std::nullopt}}};
    const envelope quick{.attack_s = 0.004, .peak = level_db{-3.0}, .decay = {{.t60_s = 0.05, .until_s = std::nullopt}}};
    const mode_shape a = envelope_shape(slow, fs, count);
    const mode_shape b = GENERATE(0, 1) == 0 ? envelope_shape(quick, fs, count) : exponential_shape(-ln1000 / (0.2 * fs), count);
    std::vector<double> sa, sb;
    shape_samples(a, count, sa);
    shape_samples(b, count, sb);
    // The samples themselves against the envelope's own amplitude (core/envelope.hpp).
    for (std::size_t n = 0; n < count; n += 97)
        CHECK_THAT(sa[n], WithinRel(envelope_amp(slow, static_cast<double>(n) / fs).lin, 1e-9));
    const double omega = GENERATE(0.0, 1e-6, 0.02, 1.5);
    std::complex<long double> direct = 0.0L;
    for (std::size_t n = 0; n < count; ++n)
        direct += static_cast<long double>(sa[n]) * static_cast<long double>(sb[n]) *
                  std::exp(std::complex<long double>(0.0L, static_cast<long double>(omega) * static_cast<long double>(n)));
    const std::complex<double> got = shape_pair_sum(a, b, {0.0, omega});
    const std::complex<double> want(static_cast<double>(direct.real()), static_cast<double>(direct.imag()));
    CAPTURE(omega, got, want);
    CHECK(std::abs(got - want) <= 1e-9 * std::max(1.0, std::abs(want)));
}

TEST_CASE("shaped amplitudes match a dense QR least squares on the shaped columns", "[modes]") {
    const double fs = 32000.0;
    const std::size_t count = 3000;
    const envelope env{.attack_s = 0.02, .peak = level_db{-6.0}, .decay = {{.t60_s = 0.5, .until_s = std::nullopt}}};
    std::vector<damped_mode> modes{{.freq_hz = 311.0, .decay_per_s = 0.0}, {.freq_hz = 330.0, .decay_per_s = 40.0},
                                   {.freq_hz = 2900.0, .decay_per_s = 300.0}};
    const std::vector<mode_shape> shapes{envelope_shape(env, fs, count), {}, {}};
    const std::vector<damped_mode> truth{{.freq_hz = 330.0, .decay_per_s = 40.0, .amp = std::polar(0.3, 1.0)},
                                         {.freq_hz = 2900.0, .decay_per_s = 300.0, .amp = std::polar(0.1, -2.0)}};
    std::vector<float> x = render_modes(truth, fs, count, 1e-3, 7);
    std::vector<double> a0;
    shape_samples(shapes[0], count, a0);
    for (std::size_t n = 0; n < count; ++n)  // the shaped mode at scale 0.7, phase 0.4
        x[n] += static_cast<float>(0.7 * a0[n] * std::cos(two_pi * 311.0 * static_cast<double>(n) / fs + 0.4));
    fit_shaped_amplitudes(x, fs, modes, shapes);
    // Reference: the explicit columns Re p_k, -Im p_k and Householder QR.
    Eigen::MatrixXd cols(static_cast<Eigen::Index>(count), 6);
    Eigen::VectorXd rhs(static_cast<Eigen::Index>(count));
    for (std::size_t n = 0; n < count; ++n) {
        const auto row = static_cast<Eigen::Index>(n);
        const double t = static_cast<double>(n) / fs;
        for (std::size_t k = 0; k < 3; ++k) {
            const double amp = k == 0 ? a0[n] : std::exp(-modes[k].decay_per_s * t);
            const std::complex<double> p = amp * std::polar(1.0, two_pi * modes[k].freq_hz * t);
            cols(row, static_cast<Eigen::Index>(2 * k)) = p.real();
            cols(row, static_cast<Eigen::Index>(2 * k + 1)) = -p.imag();
        }
        rhs(row) = x[n];
    }
    const Eigen::VectorXd theta = cols.householderQr().solve(rhs);
    for (std::size_t k = 0; k < 3; ++k) {
        const std::complex<double> want{theta(static_cast<Eigen::Index>(2 * k)), theta(static_cast<Eigen::Index>(2 * k + 1))};
        CAPTURE(k, modes[k].amp, want);
        CHECK(std::abs(modes[k].amp - want) <= 1e-6 * std::max(1.0, std::abs(want)));
    }
    CHECK(std::abs(modes[0].amp - std::polar(0.7, 0.4)) < 0.01);  // the truth, under the noise
}

TEST_CASE("sliding fit residuals equal a fresh least-squares fit on every span", "[modes]") {
    const double fs = 32000.0;
    // Decaying, held and fast modes, plus noise so the residual is not zero.
    const std::vector<damped_mode> truth{{.freq_hz = 196.0, .decay_per_s = 3.0, .amp = {0.4, -0.2}},
                                         {.freq_hz = 587.0, .decay_per_s = 0.0, .amp = {0.0, 0.1}},
                                         {.freq_hz = 2411.0, .decay_per_s = 400.0, .amp = {0.3, 0.3}}};
    const std::size_t count = 3000, starts = 300;
    const auto x = render_modes(truth, fs, count + starts, 0.01, 7);
    std::vector<damped_mode> modes = truth;
    const std::vector<double> residual = sliding_fit_residuals(x, fs, modes, count, starts);
    REQUIRE(residual.size() == starts);
    for (const std::size_t s : {std::size_t{0}, std::size_t{1}, std::size_t{127}, std::size_t{128}, std::size_t{299}}) {
        const std::span<const float> span(x.data() + s, count);
        double energy = 0.0;
        for (float v : span) energy += double(v) * double(v);
        std::vector<damped_mode> fresh = truth;
        const double want = fit_mode_amplitudes(span, fs, fresh) * energy;
        // The two differ by the ridge (1e-9 of the Gram diagonal: the explained energy moves by
        // about that share) and rounding: 1e-8 of the span's energy.
        CAPTURE(s, residual[s], want, energy);
        CHECK_THAT(residual[s], WithinAbs(want, 1e-8 * energy));
    }
}

TEST_CASE("a kept factor of the leading modes, extended by more modes, gives the residuals of a dense QR fit", "[modes]") {
    const double fs = 32000.0;
    // Five modes in the signal (two 6 Hz apart); the factor is kept for the first `lead` of them,
    // the search adds the rest (with a companion that dies fast at the first one's frequency).
    const std::vector<damped_mode> truth{{.freq_hz = 196.0, .decay_per_s = 3.0, .amp = {0.4, -0.2}},
                                         {.freq_hz = 587.0, .decay_per_s = 0.0, .amp = {0.0, 0.1}},
                                         {.freq_hz = 593.0, .decay_per_s = 20.0, .amp = {0.05, 0.02}},
                                         {.freq_hz = 2411.0, .decay_per_s = 400.0, .amp = {0.3, 0.3}},
                                         {.freq_hz = 7000.0, .decay_per_s = 150.0, .amp = {-0.1, 0.05}}};
    const std::size_t lead = GENERATE(std::size_t{0}, std::size_t{1}, std::size_t{3}, std::size_t{5});
    const std::size_t count = 2000, starts = 160;
    const auto x = render_modes(truth, fs, count + starts, 0.01, 11);
    std::vector<damped_mode> modes = truth;
    modes.push_back({.freq_hz = 196.0, .decay_per_s = 46.0});
    plain_gram_factor kept = factor_plain_gram(std::span(modes).first(lead), fs, count);
    const std::vector<double> residual = sliding_fit_residuals(x, fs, modes, count, starts, {.leading = &kept});
    REQUIRE(residual.size() == starts);
    for (const std::size_t s : {std::size_t{0}, std::size_t{1}, std::size_t{128}, std::size_t{159}}) {
        const std::span<const float> span(x.data() + s, count);
        double energy = 0.0;
        for (float v : span) energy += double(v) * double(v);
        const double want = dense_qr_amplitudes(span, fs, modes).residual * energy;
        // The ridge (1e-9 of the Gram diagonal) and rounding: 1e-7 of the span's energy.
        CAPTURE(lead, s, residual[s], want, energy);
        CHECK_THAT(residual[s], WithinAbs(want, 1e-7 * energy));
    }
    // A fit of exactly the kept modes solves with the kept factor: the same numbers as without.
    const std::span<const float> first(x.data(), count);
    std::vector<damped_mode> with(modes.begin(), modes.begin() + static_cast<std::ptrdiff_t>(lead)), without = with;
    const std::vector<mode_shape> plain(lead);
    const double r_with = fit_shaped_amplitudes(first, fs, with, plain, 1e-9, &kept);
    const double r_without = fit_shaped_amplitudes(first, fs, without, plain, 1e-9);
    CHECK(r_with == r_without);
    for (std::size_t k = 0; k < lead; ++k) {
        CAPTURE(k, with[k].amp, without[k].amp);
        CHECK(with[k].amp == without[k].amp);
    }
}

TEST_CASE("sliding fit residuals skipping dominated starts keep every solved value and the best start", "[modes]") {
    const double fs = 32000.0;
    // The modes begin lead samples into x (low noise before them), so starts near lead cost
    // least and the energy before a late start alone exceeds that.
    const std::size_t lead = GENERATE(std::size_t{0}, std::size_t{20}, std::size_t{45});
    const std::vector<damped_mode> truth{{.freq_hz = 311.0, .decay_per_s = 8.0, .amp = {0.5, 0.1}},
                                         {.freq_hz = 1733.0, .decay_per_s = 60.0, .amp = {-0.1, 0.2}}};
    const std::size_t count = 2000, starts = 200;
    std::vector<float> x = render_modes({}, fs, lead, 0.002, 11);
    const auto body = render_modes(truth, fs, count + starts, 0.002, 12);
    x.insert(x.end(), body.begin(), body.end());
    const std::vector<double> all = sliding_fit_residuals(x, fs, truth, count, starts);
    const std::vector<double> some = sliding_fit_residuals(x, fs, truth, count, starts, {.skip_dominated = true});
    REQUIRE(some.size() == starts);
    const auto best_of = [&](const std::vector<double>& r) {
        std::size_t best = 0;
        double before = 0.0, least = r[0];
        for (std::size_t s = 1; s < starts; ++s) {
            before += double(x[s - 1]) * double(x[s - 1]);
            if (before + r[s] < least) least = before + r[s], best = s;
        }
        return best;
    };
    std::size_t skipped = 0;
    double energy = 0.0;
    for (std::size_t n = 0; n < count; ++n) energy += double(x[n]) * double(x[n]);
    for (std::size_t s = 0; s < starts; ++s) {
        CAPTURE(lead, s, all[s], some[s]);
        if (std::isinf(some[s])) {
            ++skipped;
        } else {
            // The same sums, solved in blocks of another width: rounding only.
            CHECK_THAT(some[s], WithinAbs(all[s], 1e-12 * energy));
        }
    }
    CAPTURE(lead, skipped);
    CHECK(best_of(some) == best_of(all));
    CHECK(skipped > 0);  // the energy before the last starts exceeds the best start's residual
}

TEST_CASE("shape_samples into a reused buffer: each piece's samples where it lies, zeros in the gaps, pieces in any order", "[modes]") {
    // The reference: sample n is scale exp(rho (n - start)) n^power of the last piece (in the
    // shape's order) holding n, or 0; the buffer is filled with NaN first (a scratch reused).
    const std::size_t count = 3000;
    const shape_piece ramp{.start = 10, .count = 600, .scale = 1e-3, .rho = 0.0, .power = 1};
    const shape_piece fall{.start = 700, .count = 1200, .scale = 0.8, .rho = -4e-4, .power = 0};
    const shape_piece rise{.start = 1500, .count = 900, .scale = 0.2, .rho = 2e-4, .power = 0};
    const int which = GENERATE(0, 1, 2, 3);
    mode_shape shape;
    if (which == 0) shape = {ramp, fall};            // in order, gaps before, between and after
    if (which == 1) shape = {fall, ramp};            // out of order
    if (which == 2) shape = {ramp, fall, rise};      // overlapping: rise after fall
    if (which == 3) shape = {ramp, {.start = 610, .count = 2390, .scale = 0.5, .rho = -1e-3, .power = 0}};  // no gap after
    std::vector<double> out(count + GENERATE(std::size_t{0}, std::size_t{500}), std::numeric_limits<double>::quiet_NaN());
    shape_samples(shape, count, out);
    REQUIRE(out.size() == count);
    std::size_t wrong = 0;
    for (std::size_t n = 0; n < count; ++n) {
        double want = 0.0;
        for (const shape_piece& p : shape)
            if (n >= p.start && n < p.start + p.count)
                want = p.scale * std::exp(p.rho * static_cast<double>(n - p.start)) * (p.power == 1 ? static_cast<double>(n) : 1.0);
        if (!(std::abs(out[n] - want) <= 1e-12 * std::abs(want))) ++wrong;
    }
    CAPTURE(which, out[0], out[650], out[count - 1]);
    CHECK(wrong == 0);
}

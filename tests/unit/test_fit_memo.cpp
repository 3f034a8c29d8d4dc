// The memo of a least-squares fit of modes (modes/fit_memo.hpp): a sequence of fits like the onset
// refinement's passes (modes dropped, shaped, added, reordered; the samples changed; a first fit
// solved with a kept factor) gives, with the memo of the fit before, bit for bit the amplitudes and
// residual of the same fit without it. The reference is fit_shaped_amplitudes without a memo,
// itself checked against a dense QR least squares in test_modes.cpp.
#include <catch2/catch.hpp>

#include <complex>
#include <cstddef>
#include <limits>
#include <span>
#include <vector>

#include "core/envelope.hpp"
#include "core/rng.hpp"
#include "core/units.hpp"
#include "modes/damped_mode.hpp"
#include "modes/fit_memo.hpp"
#include "modes/mode_shape.hpp"
#include "test_signals.hpp"

using namespace wane;

namespace {

constexpr double fs = 48000.0;

std::vector<float> noisy_modes(std::span<const damped_mode> modes, std::size_t n, std::uint64_t seed) {
    splitmix64 rng{seed};
    const test::uniform_draw<double> uni{-1.0, 1.0};
    std::vector<float> x(n);
    for (std::size_t i = 0; i < n; ++i) {
        const double t = static_cast<double>(i) / fs;
        double v = 0.01 * uni(rng);
        for (const damped_mode& m : modes)
            v += std::real(m.amp * std::exp(std::complex<double>(-m.decay_per_s * t, two_pi * m.freq_hz * t)));
        x[i] = static_cast<float>(v);
    }
    return x;
}

struct one_fit {
    std::vector<damped_mode> modes;
    std::vector<mode_shape> shapes;
    std::span<const float> x;
};

/// Fits f with the memo (updating it) and without one; both must agree bit for bit.
void check_same(const one_fit& f, shaped_fit_memo& memo, plain_gram_factor* known = nullptr) {
    std::vector<damped_mode> with = f.modes, without = f.modes;
    const double r_with = fit_shaped_amplitudes(f.x, fs, with, f.shapes, 1e-9, known, &memo);
    const double r_without = fit_shaped_amplitudes(f.x, fs, without, f.shapes, 1e-9);
    CAPTURE(r_with, r_without);
    CHECK(r_with == r_without);
    std::size_t differ = 0;
    for (std::size_t k = 0; k < with.size(); ++k) {
        CAPTURE(k, with[k].amp, without[k].amp);
        if (with[k].amp != without[k].amp) ++differ;
    }
    CAPTURE(with.size());
    CHECK(differ == 0);
}

}  // namespace

TEST_CASE("fits with the last fit's memo equal fits without, pass after pass", "[modes][fit_memo]") {
    const std::size_t count = 4800;
    splitmix64 rng{GENERATE(std::uint64_t{3}, std::uint64_t{17}, std::uint64_t{40})};
    const test::uniform_draw<double> freq{50.0, 12000.0}, decay{0.0, 300.0}, phase{-3.14, 3.14};
    std::vector<damped_mode> modes;
    modes.reserve(24);
    for (int k = 0; k < 24; ++k)
        modes.push_back({.freq_hz = freq(rng), .decay_per_s = decay(rng), .amp = std::polar(0.05, phase(rng))});
    const std::vector<float> x = noisy_modes(modes, count, 5);
    std::vector<float> x2 = x;  // the next pass's target: a partial rendered and subtracted
    for (std::size_t n = 0; n < count; ++n) x2[n] -= static_cast<float>(0.01 * std::cos(0.03 * static_cast<double>(n)));
    const envelope env{.attack_s = 0.01, .peak = level_db{-20.0}, .decay = {{.t60_s = 0.8, .until_s = std::nullopt}}};

    shaped_fit_memo memo;
    // Pass 1: all plain, solved with a kept factor (the first fit's): the memo keeps its Gram matrix.
    const one_fit first{.modes = modes, .shapes = std::vector<mode_shape>(modes.size()), .x = x};
    plain_gram_factor kept = factor_plain_gram(modes, fs, count);
    const std::vector<double> kept_gram = kept.gram;
    check_same(first, memo, &kept);
    REQUIRE(memo.count == count);
    // The factor's Gram matrix moved into the memo (not copied).
    CHECK(kept.gram.empty());
    CHECK(memo.gram == kept_gram);

    // Pass 2: modes 3, 8 and 20 dropped, mode 5 shaped, a new mode added at the end.
    one_fit second{.x = x};
    for (std::size_t k = 0; k < modes.size(); ++k) {
        if (k == 3 || k == 8 || k == 20) continue;
        second.modes.push_back(modes[k]);
        second.shapes.push_back(k == 5 ? envelope_shape(env, fs, count) : mode_shape{});
    }
    second.modes.push_back({.freq_hz = 333.3, .decay_per_s = 12.0});
    second.shapes.emplace_back();
    {
        // The memo finds every kept plain mode at its old index, and neither the shaped nor the new one.
        std::vector<mode_shape> own;
        std::vector<double> omega;
        std::vector<char> plain;
        for (std::size_t k = 0; k < second.modes.size(); ++k) {
            own.push_back(second.shapes[k].empty() ? exponential_shape(-second.modes[k].decay_per_s / fs, count)
                                                   : second.shapes[k]);
            omega.push_back(two_pi * second.modes[k].freq_hz / fs);
            plain.push_back(second.shapes[k].empty() ? 1 : 0);
        }
        const std::vector<std::ptrdiff_t> old_of = memo_matches(memo, own, omega, plain, count, fs);
        const std::vector<std::ptrdiff_t> want{0, 1, 2, 4, -1, 6, 7, 9, 10, 11, 12, 13, 14, 15, 16, 17, 18, 19, 21, 22, 23, -1};
        CHECK(old_of == want);
        CHECK(memo_matches(memo, own, omega, plain, count + 1, fs) == std::vector<std::ptrdiff_t>(own.size(), -1));
    }
    check_same(second, memo);

    // Pass 3: the same modes on other samples (the projections are taken anew, the Gram copied).
    one_fit third = second;
    third.x = x2;
    check_same(third, memo);

    // Pass 4: the shaped mode and a plain one swapped (pairs now in the other order are computed
    // anew), one more dropped.
    one_fit fourth = third;
    std::swap(fourth.modes[4], fourth.modes[9]);
    std::swap(fourth.shapes[4], fourth.shapes[9]);
    fourth.modes.erase(fourth.modes.begin() + 12);
    fourth.shapes.erase(fourth.shapes.begin() + 12);
    check_same(fourth, memo);

    // A shorter span: nothing of the memo applies.
    one_fit shorter = fourth;
    shorter.x = std::span<const float>(x2).first(count - 100);
    for (mode_shape& s : shorter.shapes)
        if (!s.empty()) s = envelope_shape(env, fs, count - 100);
    check_same(shorter, memo);
}

TEST_CASE("memo_same_samples is bitwise: -0 and +0 differ, a NaN is the same as its own bits, sizes must match", "[modes][memo]") {
    // The reference is the samples' bit patterns themselves (std::bit_cast per sample), the test
    // the memo's fits rely on (a fit on -0 instead of +0 is not the fit the memo kept).
    const std::size_t n = GENERATE(1U, 7U, 7200U);
    const std::size_t at = GENERATE(0U, 1U, 2U);
    if (at >= n) return;
    const std::vector<float> x = noisy_modes(std::vector<damped_mode>{{.freq_hz = 440.0, .decay_per_s = 5.0, .amp = {0.3, 0.1}}}, n, 7);
    shaped_fit_memo memo{.count = n, .sample_rate_hz = fs, .x = x, .own = {}, .omega = {}, .plain = {}, .gram = {}, .rhs = {}, .gram_modes = 0};
    CAPTURE(n, at);
    CHECK(memo_same_samples(memo, x));
    std::vector<float> y = x;
    y[at] = 0.0F;
    memo.x[at] = -0.0F;
    CHECK_FALSE(memo_same_samples(memo, y));
    y[at] = std::numeric_limits<float>::quiet_NaN();
    memo.x[at] = y[at];
    CHECK(memo_same_samples(memo, y));
    CHECK_FALSE(memo_same_samples(memo, std::span<const float>(y).first(n - 1)));
}

TEST_CASE("fits with a memo lent other fits' projections (add_projections) equal fits without, as the companions' candidates run", "[modes][fit_memo]") {
    // The early companions' order (analysis/early_companion.cpp): a partial with one shape alone,
    // then beside a companion of each decay; then with another shape beside the same companions,
    // whose projections come from `seen` (every fit's, no Gram entries) and not the last fit.
    const std::size_t count = GENERATE(std::size_t{1200}, std::size_t{7200});
    const double freq_hz = GENERATE(110.0, 1234.5);
    const damped_mode partial{.freq_hz = freq_hz, .decay_per_s = 3.0, .amp = {0.2, -0.1}};
    const std::vector<float> x = noisy_modes(std::vector<damped_mode>{partial}, count, 11);
    const envelope fitted{.attack_s = 0.0, .peak = level_db{-14.0}, .decay = {{.t60_s = 0.05, .until_s = 0.01}, {.t60_s = 2.0, .until_s = std::nullopt}}};
    const envelope stft{.attack_s = 0.008, .peak = level_db{-15.0}, .decay = {{.t60_s = 1.5, .until_s = std::nullopt}}};
    shaped_fit_memo memo, seen;
    std::size_t lent = 0;  // fits whose companion came from seen alone
    for (const bool second : {false, true}) {
        const envelope& env = second ? stft : fitted;
        for (const double t60_s : {0.0, 0.015, 0.06, 0.25}) {
            one_fit f{.modes = {{.freq_hz = freq_hz, .decay_per_s = partial.decay_per_s}}, .shapes = {envelope_shape(env, fs, count)}, .x = x};
            if (t60_s > 0.0) f.modes.push_back({.freq_hz = freq_hz, .decay_per_s = ln1000 / t60_s}), f.shapes.emplace_back();
            const std::size_t before = memo.omega.size();
            add_projections(memo, seen);
            if (second && t60_s > 0.0 && memo.omega.size() > before) ++lent;
            check_same(f, memo);
            CHECK(memo.gram_modes == f.modes.size());
            add_projections(seen, memo);
        }
    }
    CHECK(lent == 3);
    CHECK(seen.gram.empty());
    CHECK(seen.omega.size() == 5);  // the two shapes and three companions, each once
}

TEST_CASE("gram_matches keeps only the memo's leading gram_modes, add_projections skips other counts and rates", "[modes][fit_memo]") {
    shaped_fit_memo memo{.count = 10, .sample_rate_hz = fs, .x = {}, .own = {}, .omega = {0.1, 0.2, 0.3}, .plain = {1, 1, 1},
                         .gram = std::vector<double>(16, 1.0), .rhs = std::vector<double>(6, 2.0), .gram_modes = 2};
    const std::vector<std::ptrdiff_t> old_of{2, -1, 0, 1};
    CHECK(gram_matches(memo, old_of) == std::vector<std::ptrdiff_t>{-1, -1, 0, 1});
    memo.own.resize(3);
    shaped_fit_memo other = memo;
    other.omega = {0.4};
    other.plain = {1};
    other.own.resize(1);
    other.rhs = {5.0, 6.0};
    other.count = 11;
    add_projections(memo, other);
    CHECK(memo.omega.size() == 3);
    other.count = 10;
    add_projections(memo, other);
    CHECK(memo.omega == std::vector<double>{0.1, 0.2, 0.3, 0.4});
    CHECK(memo.rhs.back() == 6.0);
    CHECK(memo.gram_modes == 2);
}

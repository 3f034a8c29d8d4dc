// analysis/heard_shift: the heard peak of a copy's close partials (baseband model) against a
// direct DFT of the same partials played by the renderer, at the note's pitch and transposed with
// the decays kept; the recording's heard peak (off analysis/heard_peaks' spectrum) against a direct
// DFT of the note. The direct DFT: Hann window over the heard span, |X| in dB on a 0.02-cent grid
// within +-7 cents, the parabola through the top (the same read as tests/cli/pitch_check.py).
#include <catch2/catch.hpp>

#include <cmath>
#include <complex>
#include <numbers>
#include <vector>

#include "analysis/heard_peaks.hpp"
#include "analysis/heard_shift.hpp"
#include "core/units.hpp"
#include "synthesis/render.hpp"

using namespace wane;

namespace {

constexpr double fs = 48000.0;
constexpr double span_start_s = 0.1, span_end_s = 1.1;

partial damped(double freq_hz, double peak_db, double t60_s, double phase_rad) {
    return {.freq_hz = freq_hz, .harmonic = 0, .phase_rad = phase_rad,
            .env = {.attack_s = 0.0, .peak = level_db{peak_db}, .decay = {{.t60_s = t60_s, .until_s = std::nullopt}}},
            .place = {}};
}

/// The renderer's samples of parts (frequencies times ratio) over the first 1.5 s (a span of 0.1-1.1 s).
std::vector<float> played(std::vector<partial> parts, double ratio) {
    patch p;
    p.note.length_s = 1.5;
    for (partial& q : parts) q.freq_hz *= ratio;
    p.partials = std::move(parts);
    const partial_renderer r(p, {.sample_rate_hz = fs, .include_noise = false});
    std::vector<float> y(static_cast<std::size_t>(1.5 * fs));
    r.render(0, y);
    return y;
}

/// The direct DFT's peak (Hz) within +-7 cents of centre_hz over the heard span of x.
double direct_peak_hz(const std::vector<float>& x, double centre_hz) {
    const auto first = static_cast<std::size_t>(std::llround(span_start_s * fs));
    const auto count = static_cast<std::size_t>(std::llround((span_end_s - span_start_s) * fs));
    constexpr double step_cents = 0.02;
    const int half = static_cast<int>(std::ceil(7.0 / step_cents));
    std::vector<double> windowed(count);
    for (std::size_t n = 0; n < count; ++n)
        windowed[n] = (0.5 - 0.5 * std::cos(two_pi * (static_cast<double>(n) + 0.5) / static_cast<double>(count))) *
                      static_cast<double>(x[first + n]);
    std::vector<double> db;
    for (int j = -half; j <= half; ++j) {
        const double f = centre_hz * std::exp2(j * step_cents / 1200.0);
        // The phasor e^(-i 2 pi f n / fs) by a rotation per sample, renewed from std::polar every
        // 4096 samples (a double rotation drifts by ~1e-16 a step, far under the 0.02-cent grid).
        const std::complex<double> step = std::polar(1.0, -two_pi * f / fs);
        std::complex<double> acc{}, phasor{};
        for (std::size_t n = 0; n < count; ++n) {
            if (n % 4096 == 0) phasor = std::polar(1.0, -two_pi * f * static_cast<double>(first + n) / fs);
            acc += windowed[n] * phasor;
            phasor *= step;
        }
        db.push_back(10.0 * std::log10(std::norm(acc)));
    }
    std::size_t top = 1;
    for (std::size_t k = 1; k + 1 < db.size(); ++k)
        if (db[k] > db[top]) top = k;
    const double vertex = 0.5 * (db[top - 1] - db[top + 1]) / (db[top - 1] - 2.0 * db[top] + db[top + 1]);
    return centre_hz * std::exp2((static_cast<double>(top) - half + vertex) * step_cents / 1200.0);
}

}  // namespace

TEST_CASE("copy_heard_peak_hz finds the heard peak of a close pair as a direct DFT of its render does", "[heard_shift]") {
    const double offset_cents = GENERATE(-30.0, 17.0, 45.0);
    const double twin_db = GENERATE(-8.0, -14.0);
    const double ratio = GENERATE(1.0, 0.5);
    const std::vector<partial> pair{damped(222.62, -15.0, 3.0, 0.4), damped(222.62 * std::exp2(offset_cents / 1200.0), -15.0 + twin_db, 1.6, 2.9)};
    const double model_hz = copy_heard_peak_hz(pair, 222.62, ratio, span_start_s, span_end_s);
    const double direct_hz = direct_peak_hz(played(pair, ratio), ratio * 222.62);
    const double alone_hz = copy_heard_peak_hz(std::vector<partial>{pair[0]}, 222.62, ratio, span_start_s, span_end_s);
    INFO("offset " << offset_cents << " cents, twin " << twin_db << " dB, ratio " << ratio << ": model " << model_hz
                   << " Hz, direct DFT " << direct_hz << " Hz, partial alone " << alone_hz << " Hz");
    // 0.05 cents: the model's 0.25-cent grid and parabola against the direct 0.02-cent grid
    // (measured within 0.01 cents), the float render, the images left out.
    CHECK(std::abs(cents_between(model_hz, direct_hz)) < 0.05);
    CHECK(std::abs(cents_between(alone_hz, ratio * 222.62)) < 0.05);  // one decaying partial: its own frequency
}

TEST_CASE("recording_heard_peak_hz reads the heard spectrum's peak as a direct DFT does", "[heard_shift]") {
    const double offset_cents = GENERATE(-30.0, 17.0);
    const std::vector<partial> pair{damped(440.0, -12.0, 2.0, 1.0), damped(440.0 * std::exp2(offset_cents / 1200.0), -20.0, 1.2, -0.7)};
    const std::vector<float> note = played(pair, 1.0);
    const heard_span_spectrum heard = heard_spectrum(note, fs, heard_peak_params{});
    REQUIRE(heard.start_s == span_start_s);
    const auto read_hz = recording_heard_peak_hz(heard, 440.0);
    REQUIRE(read_hz.has_value());
    const double direct_hz = direct_peak_hz(note, 440.0);
    INFO("offset " << offset_cents << " cents: heard spectrum " << *read_hz << " Hz, direct DFT " << direct_hz << " Hz");
    // 0.1 cents: the heard spectrum's 4x zero padding and its bins' parabola against the direct
    // fine grid (a log-parabola on a Hann main lobe 4 bins wide errs by a few hundredths of a bin).
    CHECK(std::abs(cents_between(*read_hz, direct_hz)) < 0.1);
}

// Onset, f0, partial tracks and inharmonicity, checked against the exact ground truth of synthetic
// notes and against the nominal pitch of real recorded notes.
#include <catch2/catch.hpp>

#include <sndfile.h>
#include <unistd.h>

#include <algorithm>
#include <cstdlib>
#include <filesystem>
#include <cmath>
#include <stdexcept>
#include <string>
#include <vector>

#include "core/units.hpp"
#include "analysis/analyze.hpp"
#include "tracking/pitch.hpp"
#include "tracking/tracker.hpp"
#include "test_signals.hpp"

using Catch::Matchers::Contains;
using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;
using namespace wane;

namespace {

using synth_partial = test::decaying_partial;

/// Decaying partials plus white Gaussian noise (test_signals.hpp).
std::vector<float> synth(const std::vector<synth_partial>& partials, double fs, double duration_s,
                         double start_s, double noise_rms, unsigned seed) {
    return test::decaying_partials(partials, fs, duration_s, start_s, noise_rms, seed);
}

double track_peak_db(const partial_track& t) {
    double best = -infinity;
    for (const auto& p : t.points) best = std::max(best, p.level_db);
    return best;
}

/// Median frequency over the track's points within 20 dB of its peak.
double track_freq_hz(const partial_track& t) {
    const double peak = track_peak_db(t);
    std::vector<double> f;
    for (const auto& p : t.points)
        if (p.level_db >= peak - 20.0) f.push_back(p.freq_hz);
    std::nth_element(f.begin(), f.begin() + static_cast<std::ptrdiff_t>(f.size() / 2), f.end());
    return f[f.size() / 2];
}

std::vector<float> read_mono(const std::string& path, double& fs) {
    SF_INFO info{};
    SNDFILE* f = sf_open(path.c_str(), SFM_READ, &info);
    REQUIRE(f != nullptr);
    std::vector<float> inter(static_cast<std::size_t>(info.frames * info.channels));
    REQUIRE(sf_readf_float(f, inter.data(), info.frames) == info.frames);
    sf_close(f);
    std::vector<float> mono(static_cast<std::size_t>(info.frames));
    for (sf_count_t i = 0; i < info.frames; ++i) mono[i] = inter[i * info.channels];
    fs = info.samplerate;
    return mono;
}

}  // namespace

TEST_CASE("stiff string: every partial, B, no spurious tracks, cut vs decayed", "[tracking][string]") {
    constexpr double f0 = 110.0, b = 3e-4, fs = 48000.0;
    constexpr double duration_s = 2.0, start_s = 0.25;
    std::vector<synth_partial> partials;
    splitmix64 rng{42};
    const test::uniform_draw<double> uni{0.0, 1.0};
    for (int n = 1; n <= 30; ++n) {
        const double nd = n;
        partials.push_back({.freq_hz = nd * f0 * std::sqrt(1.0 + b * nd * nd),  // Fletcher 1964
                            .amp_lin = 0.3 / nd,
                            .t60_s = 5.0 / std::sqrt(nd),
                            .phase_rad = two_pi * uni(rng)});
    }
    // Noise 70 dB below the strongest partial's amplitude (RMS of the noise = 0.3 x 10^(-70/20)).
    const double noise_rms = 0.3 * std::pow(10.0, -70.0 / 20.0);
    const auto x = synth(partials, fs, duration_s, start_s, noise_rms, 7);
    const tracking_result r = track_note(x, fs, {});
    CAPTURE(r.onset_s, r.f0_hz, r.inharmonicity_b, r.window_s, r.fft_size, r.hop_s, r.tracks.size());
    CHECK_THAT(r.onset_s, WithinAbs(start_s, 0.003));        // exact: the note starts at 0.25 s
    CHECK_THAT(r.inharmonicity_b, WithinRel(b, 0.03));       // B within 3%
    CHECK_THAT(r.f0_hz, WithinRel(f0, 1e-4));

    double peak_db = -infinity;
    for (const auto& t : r.tracks) peak_db = std::max(peak_db, track_peak_db(t));
    // Every true partial is found, labelled with its number, within 0.2 cents.
    for (int n = 1; n <= 30; ++n) {
        const auto& p = partials[n - 1];
        const auto it = std::find_if(r.tracks.begin(), r.tracks.end(), [&](const partial_track& t) {
            return t.harmonic == n && std::abs(cents_between(track_freq_hz(t), p.freq_hz)) < 20.0;
        });
        INFO("partial " << n << " at " << p.freq_hz << " Hz");
        REQUIRE(it != r.tracks.end());
        const double err_cents = cents_between(track_freq_hz(*it), p.freq_hz);
        CAPTURE(track_freq_hz(*it), err_cents);
        CHECK(std::abs(err_cents) <= 0.2);
        // Decayed or cut: level at the end = 20 log10(a) - 60 t_end / T60 vs the local floor.
        const double end_level_db =
            20.0 * std::log10(p.amp_lin) - 60.0 * (duration_s - start_s) / p.t60_s;
        const double floor_db = it->points.back().floor_db;
        CAPTURE(end_level_db, floor_db, it->cut_by_end);
        if (end_level_db > floor_db + 20.0) CHECK(it->cut_by_end);
        if (end_level_db < floor_db - 10.0) CHECK_FALSE(it->cut_by_end);
    }
    // No track above -60 dB re the peak that is not a true partial.
    for (const auto& t : r.tracks) {
        if (track_peak_db(t) < peak_db - 60.0) continue;
        const double f = track_freq_hz(t);
        const bool true_partial = std::any_of(partials.begin(), partials.end(), [&](auto& p) {
            return std::abs(cents_between(f, p.freq_hz)) < 1.0;
        });
        CAPTURE(f, track_peak_db(t), t.harmonic);
        CHECK(true_partial);
    }
    // Phase convention: phase of cos at the frame centre = 2 pi f (t_c - t_start) + phi.
    const auto& t1 = *std::find_if(r.tracks.begin(), r.tracks.end(), [](auto& t) { return t.harmonic == 3; });
    for (std::size_t i = 10; i < t1.points.size(); i += 37) {
        const auto& pt = t1.points[i];
        const double t_c = r.onset_s + pt.time_s;
        const double expected = two_pi * partials[2].freq_hz * (t_c - start_s) + partials[2].phase_rad;
        CAPTURE(pt.time_s, pt.phase_rad, std::remainder(expected, two_pi));
        CHECK_THAT(std::remainder(pt.phase_rad - expected, two_pi), WithinAbs(0.0, 0.02));
    }
}

TEST_CASE("a free bar (1 : 2.756 : 5.404) is not called harmonic", "[tracking][bar]") {
    constexpr double fs = 48000.0, f1 = 440.0;
    const std::vector<synth_partial> partials{
        {f1, 0.4, 3.0, 0.3}, {2.756 * f1, 0.3, 2.0, 1.1}, {5.404 * f1, 0.2, 1.0, 2.0}};  // ratios of a free bar
    const auto x = synth(partials, fs, 1.5, 0.0, 1e-5, 11);
    const tracking_result r = track_note(x, fs, {});
    CAPTURE(r.f0_hz, r.tracks.size());
    CHECK(r.f0_hz == 0.0);
    CHECK(r.inharmonicity_b == 0.0);
    for (const auto& p : partials) {
        const auto it = std::find_if(r.tracks.begin(), r.tracks.end(), [&](auto& t) {
            return std::abs(cents_between(track_freq_hz(t), p.freq_hz)) < 0.2;
        });
        CAPTURE(p.freq_hz);
        CHECK(it != r.tracks.end());
    }
    for (const auto& t : r.tracks) CHECK(t.harmonic == 0);
}

TEST_CASE("missing fundamental: f0 from the upper harmonics, --f0 overrides", "[tracking][f0]") {
    constexpr double fs = 44100.0, f0 = 196.0;
    std::vector<synth_partial> partials;
    for (int n = 2; n <= 10; ++n) partials.push_back({n * f0, 0.1, 2.0, 0.5 * n});  // no harmonic 1
    const auto x = synth(partials, fs, 1.0, 0.0, 1e-5, 3);
    const tracking_result r = track_note(x, fs, {});
    CAPTURE(r.f0_hz);
    CHECK_THAT(r.f0_hz, WithinRel(f0, 1e-4));
    for (const auto& t : r.tracks) CHECK(t.harmonic >= 2);
    // An override an octave down labels every partial with an even number.
    tracking_params octave_down;
    octave_down.f0_hz = f0 / 2.0;
    const tracking_result low = track_note(x, fs, octave_down);
    CAPTURE(low.f0_hz);
    CHECK_THAT(low.f0_hz, WithinRel(f0 / 2.0, 1e-4));
    for (const auto& t : low.tracks) CHECK(t.harmonic % 2 == 0);
}

TEST_CASE("real notes: root within 10 cents of the nominal pitch", "[tracking][real]") {
    struct note {
        const char* file;
        double nominal_hz;  // tests/data/real-notes/README.md (equal temperament, A4 = 440 Hz)
    };
    const auto n = GENERATE(note{"marimba_c3.wav", 130.81}, note{"guitar_steel_a2.wav", 110.00},
                            note{"banjo_g3.wav", 196.00}, note{"piano_d2.wav", 73.42});
    double fs = 0.0;
    const auto x = read_mono(std::string(WANE_TEST_DATA_DIR) + "/real-notes/" + n.file, fs);
    const tracking_result r = track_note(x, fs, {});
    // The root of the analysed note (pitch/root.hpp over the fitted partials).
    analysis_params ap;
    ap.noise_model = false;
    const patch p = analyze_note(x, fs, ap).value;
    const double root = root_hz(p.note);
    const double cents = cents_between(root, n.nominal_hz);
    CAPTURE(n.file, root, r.f0_hz, cents, r.inharmonicity_b, r.tracks.size(), r.window_s, r.hop_s);
    CHECK(std::abs(cents) <= 10.0);
    CHECK(r.tracks.size() >= 5);
}

TEST_CASE("bad input is refused with a clear message", "[tracking][bad]") {
    constexpr double fs = 48000.0;
    std::vector<float> silence(48000, 0.0f);
    CHECK_THROWS_WITH(track_note(silence, fs, {}), Contains("no signal"));
    std::vector<float> dc(48000, 0.5f);
    CHECK_THROWS_WITH(track_note(dc, fs, {}), Contains("no signal"));
    std::vector<float> click(48000, 0.0f);
    click[12000] = 0.9f;
    CHECK_THROWS_WITH(track_note(click, fs, {}), Contains("no partials above the noise floor"));
    std::vector<float> noise(48000);
    splitmix64 rng{5};
    const test::gaussian_draw<float> gauss{0.0f, 0.1f};
    for (float& v : noise) v = gauss(rng);
    CHECK_THROWS_WITH(track_note(noise, fs, {}), Contains("no partials above the noise floor"));
    std::vector<float> short_file(240);  // 5 ms
    for (std::size_t i = 0; i < short_file.size(); ++i)
        short_file[i] = static_cast<float>(0.5 * std::sin(two_pi * 440.0 * double(i) / fs));
    CHECK_THROWS_WITH(track_note(short_file, fs, {}), Contains("too short"));
    CHECK_THROWS_AS(track_note(short_file, fs, {}), analysis_error);
    // Clipped: a 220 Hz sine of amplitude 1.5 cut at +-1 (flat tops every half period).
    std::vector<float> clipped(48000);
    for (std::size_t i = 0; i < clipped.size(); ++i)
        clipped[i] = static_cast<float>(std::clamp(1.5 * std::sin(two_pi * 220.0 * double(i) / fs), -1.0, 1.0));
    CHECK_THROWS_WITH(track_note(clipped, fs, {}), Contains("clipped") && Contains("0.00 dBFS"));
    // The same sine unclipped at full scale, and a 16-bit-quantized 40 Hz sine (its peak value
    // repeats over several samples), are not clipped.
    std::vector<float> clean(48000), slow(48000);
    for (std::size_t i = 0; i < clean.size(); ++i) {
        clean[i] = static_cast<float>(std::sin(two_pi * 220.0 * double(i) / fs));
        slow[i] = static_cast<float>(std::round(32767.0 * std::sin(two_pi * 40.0 * double(i) / fs)) / 32768.0);
    }
    CHECK_NOTHROW(track_note(clean, fs, {}));
    CHECK_NOTHROW(track_note(slow, fs, {}));
    // Silence written by sox at 16 bits carries its dither (+-1 LSB): noise, not clipping.
    const auto dir = std::filesystem::temp_directory_path() / ("wane_test_tracking_" + std::to_string(::getpid()));
    std::filesystem::create_directories(dir);
    const std::string path = (dir / "silence.wav").string();
    REQUIRE(std::system(("sox -n -r 48000 -b 16 '" + path + "' trim 0 1").c_str()) == 0);
    double sox_fs = 0.0;
    const auto dithered = read_mono(path, sox_fs);
    std::filesystem::remove_all(dir);
    CHECK_THROWS_WITH(track_note(dithered, sox_fs, {}), Contains("no partials above the noise floor") || Contains("no signal"));
    CHECK_THROWS_AS(track_note(noise, fs, {}), analysis_error);
    // 80 ms of a 110 Hz tone: long enough to read, too short for the 73 ms window to slide.
    std::vector<float> brief(static_cast<std::size_t>(0.08 * fs));
    for (std::size_t i = 0; i < brief.size(); ++i)
        brief[i] = static_cast<float>(0.5 * std::sin(two_pi * 110.0 * double(i) / fs));
    CHECK_THROWS_WITH(track_note(brief, fs, {}), Contains("too short after the onset"));
}

TEST_CASE("inharmonicity fit recovers Fletcher's B from exact partials", "[tracking][fletcher]") {
    // Exact f_n = n f0 sqrt(1 + B n^2) (Fletcher 1964).
    std::vector<int> n;
    std::vector<double> f, w;
    for (int k = 1; k <= 20; ++k) {
        n.push_back(k);
        f.push_back(k * 65.0 * std::sqrt(1.0 + 5e-4 * k * k));
        w.push_back(1.0);
    }
    const auto fit = fit_inharmonicity(n, f, w);
    CHECK_THAT(fit.f0_hz, WithinRel(65.0, 1e-9));
    CHECK_THAT(fit.inharmonicity_b, WithinRel(5e-4, 1e-9));
    CHECK(fit.used == 20);
}

TEST_CASE("window, FFT size and hop overrides are honoured", "[tracking][params]") {
    constexpr double fs = 48000.0;
    const std::vector<synth_partial> partials{{220.0, 0.3, 2.0, 0.0}, {440.0, 0.2, 1.5, 1.0}};
    const auto x = synth(partials, fs, 1.0, 0.0, 1e-5, 9);
    tracking_params p;
    p.window_s = 0.05;
    p.fft_size = 8192;
    p.hop_s = 0.005;
    const tracking_result r = track_note(x, fs, p);
    CAPTURE(r.window_s, r.fft_size, r.hop_s);
    CHECK_THAT(r.window_s, WithinAbs(0.05, 1.0 / fs));  // odd length: within one sample
    CHECK(r.fft_size == 8192);
    CHECK_THAT(r.hop_s, WithinAbs(0.005, 0.5 / fs));
    REQUIRE(r.tracks.size() == 2);
    CHECK_THAT(r.tracks[0].points[1].time_s - r.tracks[0].points[0].time_s, WithinAbs(r.hop_s, 1e-12));
    // The automatic choice: 8 periods of f0 (220 Hz), zero padding >= 2.
    const tracking_result a = track_note(x, fs, {});
    CAPTURE(a.window_s, a.fft_size, a.hop_s, a.f0_hz);
    CHECK_THAT(a.window_s, WithinAbs(8.0 / 220.0, 2.0 / fs));
    CHECK(a.fft_size >= 2 * static_cast<int>(std::lround(a.window_s * fs)));
    tracking_params bad;
    bad.fft_size = 1024;  // shorter than the 0.05 s window
    bad.window_s = 0.05;
    CHECK_THROWS_WITH(track_note(x, fs, bad), Contains("FFT size 1024"));
}

TEST_CASE("a high, very stiff string keeps its harmonic numbers", "[tracking][string]") {
    // Treble-piano-like: f0 = 523.25 Hz, B = 2e-3, 12 partials (Fletcher 1964 law, exact).
    const double f0 = 523.25, b = GENERATE(0.0, 5e-4, 2e-3);
    constexpr double fs = 48000.0;
    std::vector<synth_partial> partials;
    for (int n = 1; n <= 12; ++n) {
        const double nd = n;
        partials.push_back({nd * f0 * std::sqrt(1.0 + b * nd * nd), 0.2 / nd, 2.0, 0.7 * nd});
    }
    const auto x = synth(partials, fs, 1.0, 0.0, 1e-5, 21);
    const tracking_result r = track_note(x, fs, {});
    CAPTURE(b, r.f0_hz, r.series_f0_hz, r.inharmonicity_b, r.tracks.size());
    CHECK(std::abs(cents_between(r.f0_hz, f0)) < 0.2);
    CHECK_THAT(r.inharmonicity_b, WithinAbs(b, 0.03 * b + 1e-7));
    int labelled = 0;
    for (const auto& t : r.tracks) {
        const int n = t.harmonic;
        REQUIRE(n >= 1);
        REQUIRE(n <= 12);
        CHECK(std::abs(cents_between(track_freq_hz(t), partials[n - 1].freq_hz)) < 0.2);
        ++labelled;
    }
    CHECK(labelled == 12);
}

TEST_CASE("a partial that dips into the noise stays one track", "[tracking][join]") {
    // 440 Hz, silent from 0.5 to 0.7 s (amplitude 0 there, raised-cosine edges of 20 ms), with a
    // steady 660 Hz partial beside it. Ground truth: one 440 Hz partial over the whole note.
    constexpr double fs = 48000.0;
    const auto count = static_cast<std::size_t>(1.5 * fs);
    std::vector<float> x(count);
    splitmix64 rng{13};
    const test::gaussian_draw<double> gauss{0.0, 1e-5};
    for (std::size_t i = 0; i < count; ++i) {
        const double t = double(i) / fs;
        double gate = 1.0;
        constexpr double edge_s = 0.02;
        if (t > 0.5 - edge_s && t < 0.7 + edge_s) {
            if (t < 0.5) gate = 0.5 + 0.5 * std::cos(pi * (t - (0.5 - edge_s)) / edge_s);
            else if (t > 0.7) gate = 0.5 - 0.5 * std::cos(pi * (t - 0.7) / edge_s);
            else gate = 0.0;
        }
        x[i] = static_cast<float>(0.3 * gate * std::cos(two_pi * 440.0 * t) + 0.2 * std::cos(two_pi * 660.0 * t + 1.0) +
                                  gauss(rng));
    }
    const tracking_result r = track_note(x, fs, {});
    int at_440 = 0;
    for (const auto& t : r.tracks) {
        if (std::abs(track_freq_hz(t) - 440.0) > 1.0) continue;
        ++at_440;
        CAPTURE(t.points.front().time_s, t.points.back().time_s, t.points.size());
        CHECK(t.points.front().time_s < 0.05);
        CHECK(t.points.back().time_s > 1.3);
        // Consecutive frames: the gap is bridged, one point per hop.
        CHECK_THAT(t.points.back().time_s - t.points.front().time_s,
                   WithinAbs(double(t.points.size() - 1) * r.hop_s, 1e-9));
    }
    CHECK(at_440 == 1);
}

TEST_CASE("partials straying from the stiff-string law keep their numbers", "[tracking][labels]") {
    // f_n = n f0 sqrt(1 + B n^2) (1 + 1.5e-6 n^3): 4% sharp of the law at n = 30, which the
    // single-B series cannot follow; the true numbers are the ground truth.
    constexpr double fs = 48000.0, f0 = 100.0, b = 1e-4;
    std::vector<synth_partial> partials;
    for (int n = 1; n <= 30; ++n) {
        const double nd = n;
        partials.push_back({nd * f0 * std::sqrt(1.0 + b * nd * nd) * (1.0 + 1.5e-6 * nd * nd * nd), 0.3 / nd, 3.0, 0.4 * nd});
    }
    const auto x = synth(partials, fs, 1.0, 0.0, 1e-5, 17);
    const tracking_result r = track_note(x, fs, {});
    CAPTURE(r.f0_hz, r.series_f0_hz, r.inharmonicity_b);
    CHECK(r.tracks.size() == 30);
    for (const auto& t : r.tracks) {
        const double f = track_freq_hz(t);
        const auto it = std::min_element(partials.begin(), partials.end(), [&](auto& a, auto& c) {
            return std::abs(a.freq_hz - f) < std::abs(c.freq_hz - f);
        });
        CAPTURE(f, t.harmonic);
        CHECK(t.harmonic == static_cast<int>(it - partials.begin()) + 1);
    }
}

TEST_CASE("odd harmonics only, falling as 1/n^2 (a triangle wave): f0 and B = 0", "[tracking][f0]") {
    constexpr double fs = 44100.0, f0 = 300.0;
    std::vector<synth_partial> partials;
    for (int n = 1; n <= 31; n += 2) partials.push_back({n * f0, 0.8 / (n * n), 4.0, 0.0});  // exact series
    const auto x = synth(partials, fs, 1.0, 0.0, 1e-6, 23);
    const tracking_result r = track_note(x, fs, {});
    CAPTURE(r.f0_hz, r.inharmonicity_b, r.tracks.size());
    CHECK(std::abs(cents_between(r.f0_hz, f0)) < 0.1);
    CHECK(r.inharmonicity_b < 1e-6);
    for (const auto& t : r.tracks) {
        CAPTURE(track_freq_hz(t), t.harmonic);
        CHECK(t.harmonic % 2 == 1);
        CHECK(std::abs(cents_between(track_freq_hz(t), t.harmonic * f0)) < 0.2);
    }
}

namespace {

/// Harmonics n = 1..count of f0_hz with the given levels (dB re 0.2), T60 3 s, random phases, in
/// noise 110 dB under 0.2; 1.5 s at 48 kHz.
std::vector<float> harmonic_comb(double f0_hz, const std::vector<double>& level_db, unsigned seed) {
    splitmix64 rng{seed};
    const test::uniform_draw<double> uni{0.0, 1.0};
    std::vector<synth_partial> partials;
    for (std::size_t i = 0; i < level_db.size(); ++i)
        partials.push_back({.freq_hz = f0_hz * static_cast<double>(i + 1),
                            .amp_lin = 0.2 * std::pow(10.0, level_db[i] / 20.0),
                            .t60_s = 3.0,
                            .phase_rad = two_pi * uni(rng)});
    return synth(partials, 48000.0, 1.5, 0.1, 0.2 * std::pow(10.0, -110.0 / 20.0), seed);
}

}  // namespace

TEST_CASE("past the 80 strongest, tracks within the faint range of the strongest are kept", "[tracking][keep]") {
    constexpr double f0 = 100.0;
    constexpr int count = 120;
    SECTION("120 harmonics, 0 to -40 dB: every one kept and numbered; at most 80 when asked") {
        std::vector<double> level_db;
        for (int n = 1; n <= count; ++n) level_db.push_back(-40.0 * (n - 1) / (count - 1));
        const auto x = harmonic_comb(f0, level_db, 5);
        const tracking_result r = track_note(x, 48000.0, {});
        CAPTURE(r.f0_hz, r.tracks.size());
        std::vector<int> seen(count + 1, 0);
        for (const auto& t : r.tracks) {
            CAPTURE(t.harmonic, track_freq_hz(t));
            REQUIRE(t.harmonic >= 1);
            REQUIRE(t.harmonic <= count);
            CHECK(std::abs(cents_between(track_freq_hz(t), f0 * t.harmonic)) < 1.0);
            ++seen[t.harmonic];
        }
        for (int n = 1; n <= count; ++n) {
            CAPTURE(n);
            CHECK(seen[n] == 1);
        }
        tracking_params at_most_80;
        at_most_80.max_partials = 80;
        const tracking_result r80 = track_note(x, 48000.0, at_most_80);
        REQUIRE(r80.tracks.size() == 80);
        for (const auto& t : r80.tracks) {
            CAPTURE(t.harmonic);
            CHECK(t.harmonic <= 80);  // the strongest: levels fall with n
        }
    }
    SECTION("80 harmonics within 30 dB and 40 at -65 dB: the faint 40 kept only in a wider range") {
        const double range_db = GENERATE(60.0, 75.0);
        std::vector<double> level_db;
        for (int n = 1; n <= count; ++n) level_db.push_back(n <= 80 ? -30.0 * (n - 1) / 79 : -65.0);
        const auto x = harmonic_comb(f0, level_db, 6);
        tracking_params p;
        p.faint_range_db = range_db;
        const tracking_result r = track_note(x, 48000.0, p);
        int faint = 0;
        for (const auto& t : r.tracks) faint += t.harmonic > 80 ? 1 : 0;
        CAPTURE(range_db, r.tracks.size(), faint);
        CHECK(r.tracks.size() == (range_db > 65.0 ? 120U : 80U));
        CHECK(faint == (range_db > 65.0 ? 40 : 0));
    }
}

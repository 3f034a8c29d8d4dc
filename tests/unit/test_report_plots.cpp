// The HTML report (src/report/report.cpp) checked from the outside (tests/unit/report_page.hpp builds
// the page from a synthetic note and takes it apart): the SVG plots and their labels, the comparison
// of a 3 dB quieter render, tracks matched to partials, blank and one-row spectrograms, and the size
// of a page for a note with 80 partials and 9 noise bands.
#include <catch2/catch.hpp>

#include <png.h>
#include <sndfile.h>

#include <algorithm>
#include <cmath>
#include <cstring>
#include <string>
#include <string_view>
#include <vector>

#include "core/patch.hpp"
#include "measure/compare.hpp"
#include "report/report.hpp"
#include "report/spectrogram_image.hpp"
#include "report/svg_plot.hpp"
#include "synthesis/render.hpp"
#include "tracking/tracker.hpp"
#include "report_page.hpp"

using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;
using namespace wane;
using namespace wane::test;

TEST_CASE("SVG plots are balanced and each envelope plot shows its own partial's track", "[report]") {
    const built_report& r = the_report();
    const std::string& html = r.html;
    CHECK(count(html, "<svg ") == count(html, "</svg>"));
    CHECK(count(html, "<svg ") == count(html, "xmlns='http://www.w3.org/2000/svg'"));
    CHECK(count(html, "<g ") == count(html, "</g>"));
    CHECK(count(html, "<text") == count(html, "</text>"));
    const std::string envelopes = section(html, "envelopes");
    REQUIRE(count(envelopes, "<svg class='envelope'") == static_cast<std::size_t>(harmonics));
    std::vector<double> track_freqs_hz;
    for (std::size_t at = envelopes.find("<svg class='envelope'"); at != std::string::npos;
         at = envelopes.find("<svg class='envelope'", at + 1)) {
        const std::string_view tag(envelopes.data() + at, envelopes.find('>', at) - at);
        const std::string freq = attribute(tag, "data-freq-hz"), track = attribute(tag, "data-track-freq-hz");
        CAPTURE(freq, track);
        REQUIRE(!freq.empty());
        REQUIRE(!track.empty());
        // Ground truth: the synthetic partial sits at exactly n f0; its track's frequency is within 0.1%.
        CHECK_THAT(std::stod(track), WithinRel(std::stod(freq), 0.001));
        track_freqs_hz.push_back(std::stod(track));
        const std::size_t end = envelopes.find("</svg>", at);
        CHECK(count(envelopes.substr(at, end - at), "<polyline") == 2);  // measured + fitted
    }
    // In order of frequency, one per harmonic.
    CHECK(std::is_sorted(track_freqs_hz.begin(), track_freqs_hz.end()));
    for (std::size_t i = 0; i < track_freqs_hz.size(); ++i) {
        CHECK_THAT(track_freqs_hz[i], WithinRel(static_cast<double>(i + 1) * f0_hz, 0.001));
    }
}

TEST_CASE("envelope plots label the T60s of the patch", "[report]") {
    const std::string envelopes = section(the_report().html, "envelopes");
    // Harmonic 2 of the synthetic patch: 1.5 s until 0.4 s, then 3.0 s.
    CHECK(envelopes.find("partial 2 (harmonic 2), 440.0 Hz") != std::string::npos);
    CHECK(envelopes.find("T60 1.50 s to 0.40 s, then 3.00 s") != std::string::npos);
    CHECK(envelopes.find("level (dBFS)") != std::string::npos);
    CHECK(envelopes.find("time from onset (s)") != std::string::npos);
    const std::string spectrogram = section(the_report().html, "spectrogram");
    CHECK(spectrogram.find("frequency (Hz)") != std::string::npos);
    CHECK(spectrogram.find("time in the source file (s)") != std::string::npos);
}

TEST_CASE("the comparison shows the 3 dB quieter render", "[report]") {
    const built_report& r = the_report();
    const std::string compare = section(r.html, "compare");
    // A render 3 dB quieter than its source: log-spectral distance 3.0 dB (exact for a pure gain
    // change over bins counted in both), so the page shows "3.00 dB" first in the row.
    CAPTURE(r.comparison.whole.log_spectral_distance_db);
    CHECK_THAT(r.comparison.whole.log_spectral_distance_db, WithinAbs(3.0, 0.05));
    const std::size_t row = compare.find("log-spectral distance");
    REQUIRE(row != std::string::npos);
    CHECK(compare.find("<td>3.0", row) != std::string::npos);
    CHECK(count(compare, "<tr><td>") >= r.comparison.bands.size() + 4);
    // The render's first sample lines up with the source's onset after the 0.1 s lead-in
    // (ground truth: the source is the render's patch behind 4800 samples of silence).
    CHECK(compare.find("aligned to the source at</td><td>0.100 s (patch onset 0.100 s)") != std::string::npos);
}

TEST_CASE("tracks are matched to partials by harmonic number and frequency", "[report]") {
    // Constructed tracks: ground truth by construction.
    tracking_result tr;
    tr.fft_size = 4800;  // 10 Hz bins at 48 kHz
    auto track_at = [](double f, int harmonic) {
        partial_track t;
        t.harmonic = harmonic;
        for (int i = 0; i < 5; ++i) t.points.push_back({.time_s = 0.01 * i, .freq_hz = f, .level_db = -20.0});
        return t;
    };
    tr.tracks = {track_at(220.0, 1), track_at(440.0, 2), track_at(446.0, 0), track_at(1000.0, 0)};
    auto part = [](double f, int harmonic) { return partial{.freq_hz = f, .harmonic = harmonic, .phase_rad = 0.0, .env = {}}; };
    CHECK(matching_track(part(221.0, 1), tr, rate_hz) == 0);
    CHECK(matching_track(part(445.0, 2), tr, rate_hz) == 1);   // same harmonic wins over nearer
    CHECK(matching_track(part(445.0, 0), tr, rate_hz) == 2);   // no number: the nearest
    CHECK(matching_track(part(220.0, 3), tr, rate_hz) == -1);  // other harmonic number
    CHECK(matching_track(part(1009.0, 0), tr, rate_hz) == 3);  // within 1% of 1009 Hz
    CHECK(matching_track(part(1025.0, 0), tr, rate_hz) == -1); // 25 Hz off: beyond max(20 Hz, 10.25 Hz)
    CHECK(matching_track(part(600.0, 0), tr, rate_hz) == -1);
}

TEST_CASE("a silent source gives a blank spectrogram, a sine one dark row", "[report]") {
    const std::vector<float> silence(static_cast<std::size_t>(rate_hz / 2), 0.0f);
    const decoded_png blank = decode_png(spectrogram_png(make_spectrogram(silence, rate_hz), 4000.0, 90.0));
    double darkest = 1.0;
    for (int y = 0; y < blank.height; ++y)
        for (int x = 0; x < blank.width; ++x) darkest = std::min(darkest, blank.lightness(x, y));
    CAPTURE(blank.width, blank.height, darkest);
    CHECK(darkest == 1.0);

    // A 1 kHz sine at -6 dBFS (exact ground truth): its row is the darkest, rows far from it white.
    std::vector<float> sine(silence.size());
    for (std::size_t i = 0; i < sine.size(); ++i) sine[i] = static_cast<float>(0.5 * std::sin(two_pi * 1000.0 * static_cast<double>(i) / rate_hz));
    const spectrogram_db s = make_spectrogram(sine, rate_hz);
    const decoded_png img = decode_png(spectrogram_png(s, 4000.0, 90.0));
    const int x = img.width / 2;
    const int tone_row = img.height - 1 - static_cast<int>(1000.0 / s.bin_hz);
    const int far_row = img.height - 1 - static_cast<int>(3000.0 / s.bin_hz);
    CAPTURE(img.width, img.height, tone_row, img.lightness(x, tone_row), img.lightness(x, far_row));
    CHECK(img.lightness(x, tone_row) < 0.1);
    CHECK(img.lightness(x, far_row) > 0.9);
}

TEST_CASE("a 4 s note with 80 partials and 9 noise bands gives one page under 10 MB", "[report]") {
    // 80 harmonics of 110 Hz (to 8.8 kHz) and octave noise bands, rendered at 48 kHz; every view
    // and player the CLI fills (the size rule of issue 20).
    patch p = synthetic_patch();
    p.note.f0_hz = 110.0;
    p.partials.clear();
    for (int n = 1; n <= 80; ++n) {
        p.partials.push_back({.freq_hz = 110.0 * n, .harmonic = n, .phase_rad = 0.1 * n,
                              .env = {.attack_s = 0.0, .peak = level_db{-12.0 - 0.5 * n},
                                      .decay = {{.t60_s = 6.0 / std::sqrt(n), .until_s = std::nullopt}}}});
    }
    for (int k = 0; k < 9; ++k) {
        const double low_hz = 44.0 * std::exp2(k);
        p.noise.push_back({.low_hz = low_hz, .high_hz = 2.0 * low_hz,
                           .env = {.attack_s = 0.0, .peak = level_db{-50.0}, .decay = {{.t60_s = 0.3, .until_s = std::nullopt}}}});
    }
    const std::vector<float> render = render_patch(p, {.sample_rate_hz = rate_hz});
    const std::vector<float> partials = render_patch(p, {.sample_rate_hz = rate_hz, .include_noise = false});
    std::vector<float> noise(render.size());
    for (std::size_t i = 0; i < render.size(); ++i) noise[i] = render[i] - partials[i];
    const auto lead_in = static_cast<std::size_t>(std::lround(lead_in_s * rate_hz));
    std::vector<float> source(lead_in, 0.0f), partials_in_source(lead_in, 0.0f);
    source.insert(source.end(), render.begin(), render.end());
    partials_in_source.insert(partials_in_source.end(), partials.begin(), partials.end());
    const compare_result comparison = compare_signals(source, render, rate_hz, {});
    report_inputs in{.title = "80 partials",
                     .value = &p,
                     .spectrogram = make_spectrogram(source, rate_hz),
                     .source_audio = source,
                     .source_rate_hz = rate_hz,
                     .render_audio = render,
                     .render_rate_hz = rate_hz,
                     .copy_in_source = source,
                     .partials_in_source = partials_in_source,
                     .partials_audio = partials,
                     .noise_audio = noise,
                     .source_name = {},
                     .info_table = {},
                     .comparison = &comparison,
                     .comparison_note = {}};
    const std::string html = make_report_html(in);
    CAPTURE(html.size());
    WARN("page of a 4 s note with 80 partials and 9 noise bands: " << html.size() << " bytes");
    CHECK(html.size() < max_report_bytes);
    CHECK(count(section(html, "envelopes"), "<svg class='envelope'") == 80);
    CHECK(count(section(html, "noise"), "<svg class='envelope'") == 9);
    CHECK(count(html, "data:audio/wav;base64,") == 5);
    // The copy is the source itself: no difference sentence.
    CHECK(count(html, "<li class='difference'>") == 0);
}

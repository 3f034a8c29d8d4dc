// The HTML report (src/report/report.cpp) checked from the outside (tests/unit/report_page.hpp builds
// the page from a synthetic note and takes it apart): base64, the sections and their order, size,
// escaping, the spectrograms and their colours, the summary, the audio players (the plots, the
// comparison and the track matching: test_report_plots.cpp).
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
using namespace wane;
using namespace wane::test;

TEST_CASE("base64 encodes the RFC 4648 test vectors", "[report]") {
    // RFC 4648, section 10 (test vectors).
    const std::pair<const char*, const char*> vectors[] = {{"", ""},         {"f", "Zg=="},         {"fo", "Zm8="},
                                                           {"foo", "Zm9v"},  {"foob", "Zm9vYg=="},  {"fooba", "Zm9vYmE="},
                                                           {"foobar", "Zm9vYmFy"}};
    for (const auto& [plain, encoded] : vectors) {
        CAPTURE(plain, encoded);
        CHECK(base64_encode(plain) == encoded);
        CHECK(base64_decode(encoded) == plain);
    }
}

TEST_CASE("base64 round-trips every byte value", "[report]") {
    const int length = GENERATE(0, 1, 2, 3, 254, 255, 256, 257);
    std::string bytes;
    for (int i = 0; i < length; ++i) bytes += static_cast<char>((i * 37 + 11) & 0xff);
    CAPTURE(length);
    const std::string encoded = base64_encode(bytes);
    CHECK(encoded.size() == (bytes.size() + 2) / 3 * 4);  // RFC 4648, section 4: 4 characters per 3 bytes
    CHECK(base64_decode(encoded) == bytes);
}

TEST_CASE("the report has every section, in page order", "[report]") {
    const std::string& html = the_report().html;
    std::size_t last = 0;
    for (const char* id : {"summary", "spectrogram", "onset", "envelopes", "noise", "patch", "compare", "listen"}) {
        const std::size_t at = html.find(std::string("<section id='") + id + "'");
        CAPTURE(id, at, last);
        REQUIRE(at != std::string::npos);
        CHECK(at > last);
        last = at;
        CHECK(count(html, std::string("id='") + id + "'") == 1);
    }
    CHECK(html.rfind("<!DOCTYPE html>", 0) == 0);
    CHECK(count(html, "<section") == count(html, "</section>"));
}

TEST_CASE("the report is self-contained and under 10 MB for a 4 s note", "[report]") {
    const std::string& html = the_report().html;
    const std::size_t bytes = html.size();
    CAPTURE(bytes, the_report().source.size());
    CHECK(bytes < max_report_bytes);
    // Only the SVG namespace name may look like a URL; it is an identifier, never fetched.
    const std::string svg_ns = "http://www.w3.org/2000/svg";
    std::string rest = html;
    for (std::size_t at = rest.find(svg_ns); at != std::string::npos; at = rest.find(svg_ns, at)) rest.erase(at, svg_ns.size());
    CHECK(rest.find("http://") == std::string::npos);
    CHECK(rest.find("https://") == std::string::npos);
    CHECK(rest.find("src='//") == std::string::npos);
    // Scripts are inline only: the page's own, and the patch's numbers as JSON data.
    CHECK(count(rest, "<script") == 2);
    CHECK(count(rest, "<script>") == 1);
    CHECK(count(rest, "<script type='application/json' id='patch-data'>") == 1);
    CHECK(rest.find("<script src") == std::string::npos);
    CHECK(rest.find("<link") == std::string::npos);
    // Every src/href is a data: URI or an in-page anchor.
    for (const std::string attr : {" src='", " href='"}) {
        for (std::size_t at = html.find(attr); at != std::string::npos; at = html.find(attr, at + 1)) {
            const std::string start = html.substr(at + attr.size(), 5);
            CAPTURE(attr, start);
            CHECK((start == "data:" || start[0] == '#'));
        }
    }
}

TEST_CASE("text is escaped", "[report]") {
    const std::string& html = the_report().html;
    CHECK(html.find("report of &lt;synthetic&gt; &amp; test") != std::string::npos);
    CHECK(section(html, "patch").find("name &lt;test&gt; &amp; &quot;table&quot;") != std::string::npos);
    CHECK(html.find("<synthetic>") == std::string::npos);
}

TEST_CASE("the spectrograms decode and show the partials up to the Nyquist frequency", "[report]") {
    const built_report& r = the_report();
    const std::vector<std::string> pngs = data_uris(r.html, "image/png");
    // Source, copy and difference, each on a linear and a log frequency axis.
    REQUIRE(pngs.size() == 6);
    const spectrogram_db& s = r.spectrogram;
    const image_size size{};
    for (const std::string& png : pngs) {
        const decoded_png img = decode_png(base64_decode(png));
        CAPTURE(img.width, img.height, s.frames);
        CHECK(img.width == std::min(size.width, s.frames));
        CHECK(img.height == size.height);
    }
    // The source on the log axis (20 Hz .. 24 kHz, 360 rows: 2% of the frequency per row): half
    // a second into the note, the row of each harmonic is much darker (louder) than the row half
    // way to the next (no partial there in the synthetic note, 110 Hz from both: beyond the
    // Blackman-Harris main lobe).
    const decoded_png img = decode_png(base64_decode(pngs[1]));
    const double nyquist_hz = s.bin_hz * (s.bins - 1);
    auto row_of = [&](double f) {
        return img.height - 1 - static_cast<int>(std::floor(img.height * std::log(f / 20.0) / std::log(nyquist_hz / 20.0)));
    };
    const int x = static_cast<int>((lead_in_s + 0.5 - s.start_s) / s.hop_s * img.width / s.frames);
    REQUIRE(x < img.width);
    for (int n = 1; n <= 4; ++n) {
        const double on = img.lightness(x, row_of(n * f0_hz));
        const double between = img.lightness(x, row_of((n + 0.5) * f0_hz));
        CAPTURE(n, on, between);
        CHECK(on + 0.3 < between);
    }
    // The axes run to the Nyquist frequency (24 kHz): the linear one has a 20 kHz tick, the log one 20000.
    CHECK(count(section(r.html, "spectrogram"), ">20000</text>") == 6);
}

TEST_CASE("the difference colours run from Okabe-Ito blue through white to vermilion", "[report]") {
    using report_plot::diverging_colour;
    const report_plot::rgb white = diverging_colour(0.0), low = diverging_colour(-1.0), high = diverging_colour(1.0);
    CHECK((white.r == 255 && white.g == 255 && white.b == 255));
    CHECK((low.r == 0x00 && low.g == 0x72 && low.b == 0xb2));    // Okabe & Ito 2008: blue
    CHECK((high.r == 0xd5 && high.g == 0x5e && high.b == 0x00)); // vermilion
    // Equal spectrograms give a white picture; the copy 12 dB louder everywhere the source sounds
    // gives the colour of +12 dB on the +-24 dB scale there.
    spectrogram_db a{.frames = 4, .bins = 64, .bin_hz = 100.0, .hop_s = 0.01, .start_s = 0.0, .level_db = {}};
    a.level_db.assign(std::size_t{4} * 64, static_cast<float>(spectrogram_floor_db));
    for (std::size_t f = 0; f < 4; ++f) a.level_db[f * 64 + 20] = -10.0f;  // 2 kHz
    spectrogram_db b = a;
    for (float& v : b.level_db) v += v > -100.0f ? 12.0f : 0.0f;
    const image_size size{.width = 4, .height = 63};
    const decoded_png same = decode_png(difference_png(a, a, 0.0, 6300.0, freq_axis::linear, 90.0, 24.0, size));
    const decoded_png louder = decode_png(difference_png(a, b, 0.0, 6300.0, freq_axis::linear, 90.0, 24.0, size));
    double darkest = 1.0;
    for (int y = 0; y < same.height; ++y) darkest = std::min(darkest, same.lightness(0, y));
    CHECK(darkest == 1.0);
    const int row = louder.height - 1 - 20;  // 100 Hz rows: the 2 kHz bin
    const report_plot::rgb want = diverging_colour(0.5);
    CAPTURE(louder.lightness(0, row), want.r, want.g, want.b);
    CHECK(louder.lightness(0, row) < 0.9);
    CHECK(louder.lightness(0, row - 5) == 1.0);
}

TEST_CASE("the summary leads with the headline figure and defines every figure", "[report]") {
    const std::string summary = section(the_report().html, "summary");
    const std::size_t at = summary.find("<p id='headline'><b>fidelity: log-spectral distance ");
    REQUIRE(at != std::string::npos);
    const double lsd = std::stod(summary.substr(at + std::strlen("<p id='headline'><b>fidelity: log-spectral distance ")));
    CAPTURE(lsd);
    CHECK_THAT(lsd, WithinAbs(3.0, 0.05));  // the render is 3 dB quieter
    CHECK(summary.find("onset SNR") != std::string::npos);
    for (const char* name : {"log-spectral distance (the headline)", "onset SNR", "difference cells", "missing partial",
                             "smeared onset"}) {
        CAPTURE(name);
        CHECK(summary.find(std::string("<dt>") + name + "</dt>") != std::string::npos);
    }
}

TEST_CASE("the audio players carry the source and the render as WAV", "[report]") {
    const built_report& r = the_report();
    const std::string listen = section(r.html, "listen");
    // Source, copy, partials only, residual embedded; one player for a partial alone, filled by the
    // page's script (the patch has no noise bands, so no noise player).
    CHECK(count(listen, "<audio ") == 5);
    CHECK(count(listen, "</audio>") == 5);
    const std::vector<std::string> wavs = data_uris(r.html, "audio/wav");
    REQUIRE(wavs.size() == 4);
    {
        // The residual is the source minus the copy lined up: here 1 - 10^(-3/20) of the source.
        const decoded_wav w = decode_wav(base64_decode(wavs[3]));
        REQUIRE(static_cast<std::size_t>(w.info.frames) == r.source.size());
        double worst = 0.0;
        for (std::size_t i = 0; i < r.source.size(); ++i) {
            const double want = static_cast<double>(r.source[i]) - static_cast<double>(r.copy_in_source[i]);
            worst = std::max(worst, std::abs(static_cast<double>(w.samples[i]) - want));
        }
        CAPTURE(worst);
        CHECK(worst <= 1.0 / 32767.0);  // 16-bit rounding
    }
    const std::vector<float>* expected[] = {&r.source, &r.render};
    for (std::size_t k = 0; k < 2; ++k) {
        const decoded_wav w = decode_wav(base64_decode(wavs[k]));
        const std::vector<float>& want = *expected[k];
        CAPTURE(k, w.info.samplerate, w.info.channels, w.info.frames, want.size());
        CHECK(w.info.samplerate == static_cast<int>(rate_hz));
        CHECK(w.info.channels == 1);
        CHECK((w.info.format & SF_FORMAT_TYPEMASK) == SF_FORMAT_WAV);
        REQUIRE(static_cast<std::size_t>(w.info.frames) == want.size());
        // 16-bit PCM, no scaling (both peaks are below full scale). libsndfile writes a float x as
        // round(32767 x) and reads a sample s back as s / 32768 (from memory), so
        // |read - x| <= (0.5 + |x|) / 32767, plus float rounding in the conversion (< 1e-7).
        double worst_excess = -1.0;
        for (std::size_t i = 0; i < want.size(); ++i) {
            const double error = std::abs(static_cast<double>(w.samples[i]) - static_cast<double>(want[i]));
            worst_excess = std::max(worst_excess, error - (0.5 + std::abs(static_cast<double>(want[i]))) / 32767.0);
        }
        CAPTURE(worst_excess);
        CHECK(worst_excess <= 1e-7);
    }
}

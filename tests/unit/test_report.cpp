// The HTML report (src/report/report.cpp) checked from the outside: the page is built from a
// synthetic note whose partials are known exactly (a patch rendered by the renderer, tracked by the
// tracker), then taken apart again: base64 decoded here (RFC 4648, written independently of the
// encoder), the PNG decoded by libpng's simplified reader, the WAVs by libsndfile.
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

using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;
using namespace wane;

namespace {

constexpr double rate_hz = 48000.0;
constexpr double f0_hz = 220.0;
constexpr int harmonics = 8;
constexpr double lead_in_s = 0.1;  // silence before the onset, as in a recording
constexpr double note_s = 4.0;     // the size requirement is stated for a 4 s note
constexpr std::size_t max_report_bytes = 10'000'000;  // issue 20: under 10 MB for a 4 s note

/// A plucked-string-like patch: harmonics 1..8 of 220 Hz, falling 4 dB per harmonic, each
/// decaying in two stages (faster first), as in patch format v1.
patch synthetic_patch() {
    patch p;
    p.note.name = "test-a3";
    p.note.f0_hz = f0_hz;
    p.note.length_s = note_s;
    p.source.file = "synthetic.wav";
    p.source.sample_rate_hz = rate_hz;
    p.source.onset_s = lead_in_s;
    for (int n = 1; n <= harmonics; ++n) {
        const double first_t60_s = 3.0 / n, second_t60_s = 6.0 / n;
        p.partials.push_back({.freq_hz = n * f0_hz, .harmonic = n, .phase_rad = 0.0,
                              .env = {.attack_s = 0.0, .peak = level_db{-12.0 - 4.0 * (n - 1)},
                                      .decay = {{.t60_s = first_t60_s, .until_s = 0.4}, {.t60_s = second_t60_s, .until_s = std::nullopt}}}});
    }
    return p;
}

/// RFC 4648, section 4 (base64 alphabet), decoding written here; '=' padding at the end only.
std::string base64_decode(std::string_view text) {
    auto value = [](char c) -> int {
        if (c >= 'A' && c <= 'Z') return c - 'A';
        if (c >= 'a' && c <= 'z') return c - 'a' + 26;
        if (c >= '0' && c <= '9') return c - '0' + 52;
        if (c == '+') return 62;
        if (c == '/') return 63;
        return -1;
    };
    REQUIRE(text.size() % 4 == 0);
    std::string out;
    bool valid = true;
    for (std::size_t i = 0; i < text.size(); i += 4) {
        unsigned v = 0;
        int pad = 0;
        for (std::size_t k = 0; k < 4; ++k) {
            const char c = text[i + k];
            if (c == '=') {
                valid = valid && i + 4 == text.size() && k >= 2;
                ++pad;
                v <<= 6;
                continue;
            }
            const int d = value(c);
            valid = valid && pad == 0 && d >= 0;
            v = (v << 6) | static_cast<unsigned>(std::max(d, 0));
        }
        out += static_cast<char>((v >> 16) & 0xff);
        if (pad < 2) out += static_cast<char>((v >> 8) & 0xff);
        if (pad < 1) out += static_cast<char>(v & 0xff);
    }
    REQUIRE(valid);
    return out;
}

/// The base64 payloads of every "data:<mime>;base64," URI in the page, in order.
std::vector<std::string> data_uris(const std::string& html, const std::string& mime) {
    std::vector<std::string> out;
    const std::string head = "data:" + mime + ";base64,";
    for (std::size_t at = html.find(head); at != std::string::npos; at = html.find(head, at + 1)) {
        const std::size_t begin = at + head.size();
        const std::size_t end = html.find('\'', begin);
        REQUIRE(end != std::string::npos);
        out.push_back(html.substr(begin, end - begin));
    }
    return out;
}

std::size_t count(const std::string& text, const std::string& what) {
    std::size_t n = 0;
    for (std::size_t at = text.find(what); at != std::string::npos; at = text.find(what, at + what.size())) ++n;
    return n;
}

struct decoded_png {
    int width = 0, height = 0;
    std::vector<unsigned char> rgb;
    double lightness(int x, int y) const {
        const std::size_t at = (static_cast<std::size_t>(y) * static_cast<std::size_t>(width) + static_cast<std::size_t>(x)) * 3;
        return (rgb[at] + rgb[at + 1] + rgb[at + 2]) / (3.0 * 255.0);
    }
};

decoded_png decode_png(const std::string& bytes) {
    png_image image;
    std::memset(&image, 0, sizeof image);
    image.version = PNG_IMAGE_VERSION;
    REQUIRE(png_image_begin_read_from_memory(&image, bytes.data(), bytes.size()) != 0);
    image.format = PNG_FORMAT_RGB;
    decoded_png out{.width = static_cast<int>(image.width), .height = static_cast<int>(image.height), .rgb = {}};
    out.rgb.resize(PNG_IMAGE_SIZE(image));
    REQUIRE(png_image_finish_read(&image, nullptr, out.rgb.data(), 0, nullptr) != 0);
    return out;
}

struct memory_reader {
    const std::string* bytes;
    sf_count_t pos = 0;
};

struct decoded_wav {
    SF_INFO info{};
    std::vector<float> samples;
};

decoded_wav decode_wav(const std::string& bytes) {
    SF_VIRTUAL_IO vio{};
    vio.get_filelen = [](void* u) { return static_cast<sf_count_t>(static_cast<memory_reader*>(u)->bytes->size()); };
    vio.seek = [](sf_count_t offset, int whence, void* u) {
        auto* r = static_cast<memory_reader*>(u);
        const sf_count_t base = whence == SEEK_CUR ? r->pos : whence == SEEK_END ? static_cast<sf_count_t>(r->bytes->size()) : 0;
        r->pos = std::clamp<sf_count_t>(base + offset, 0, static_cast<sf_count_t>(r->bytes->size()));
        return r->pos;
    };
    vio.read = [](void* ptr, sf_count_t n, void* u) {
        auto* r = static_cast<memory_reader*>(u);
        const sf_count_t got = std::min(n, static_cast<sf_count_t>(r->bytes->size()) - r->pos);
        std::memcpy(ptr, r->bytes->data() + r->pos, static_cast<std::size_t>(got));
        r->pos += got;
        return got;
    };
    vio.write = [](const void*, sf_count_t, void*) -> sf_count_t { return 0; };
    vio.tell = [](void* u) { return static_cast<memory_reader*>(u)->pos; };
    memory_reader reader{&bytes};
    decoded_wav out;
    SNDFILE* f = sf_open_virtual(&vio, SFM_READ, &out.info, &reader);
    REQUIRE(f != nullptr);
    out.samples.resize(static_cast<std::size_t>(out.info.frames * out.info.channels));
    const sf_count_t got = sf_readf_float(f, out.samples.data(), out.info.frames);
    sf_close(f);
    REQUIRE(got == out.info.frames);
    return out;
}

/// The text between the first "<section id='ID'" and the next "</section>".
std::string section(const std::string& html, const std::string& id) {
    const std::size_t begin = html.find("<section id='" + id + "'");
    if (begin == std::string::npos) return {};
    const std::size_t end = html.find("</section>", begin);
    return html.substr(begin, end == std::string::npos ? std::string::npos : end - begin);
}

/// Value of attribute name='...' within one tag, or "".
std::string attribute(std::string_view tag, const std::string& name) {
    const std::string head = " " + name + "='";
    const std::size_t at = tag.find(head);
    if (at == std::string_view::npos) return {};
    const std::size_t begin = at + head.size();
    return std::string(tag.substr(begin, tag.find('\'', begin) - begin));
}

struct built_report {
    patch value;
    std::vector<float> source;
    std::vector<float> render;
    std::vector<float> copy_in_source;  ///< the render behind the same lead-in as the source
    tracking_result tracking;
    compare_result comparison;
    spectrogram_db spectrogram;
    std::string html;
};

const built_report& the_report() {
    static const built_report r = [] {
        built_report b;
        b.value = synthetic_patch();
        const std::vector<float> note = render_patch(b.value, {.sample_rate_hz = rate_hz});
        const auto lead_in = static_cast<std::size_t>(std::lround(lead_in_s * rate_hz));
        b.source.assign(lead_in, 0.0f);
        b.source.insert(b.source.end(), note.begin(), note.end());
        // The "render" differs from the source: 3 dB quieter, so the comparison is not trivial.
        b.render = render_patch(b.value, {.sample_rate_hz = rate_hz, .gain_db = -3.0});
        b.copy_in_source.assign(lead_in, 0.0f);
        b.copy_in_source.insert(b.copy_in_source.end(), b.render.begin(), b.render.end());
        b.copy_in_source.resize(b.source.size());
        tracking_params tp;
        tp.f0_hz = f0_hz;
        b.tracking = track_note(b.source, rate_hz, tp);
        b.comparison = compare_signals(b.source, b.render, rate_hz, {});
        b.spectrogram = make_spectrogram(b.source, rate_hz);
        report_inputs in{.title = "report of <synthetic> & test",
                         .value = &b.value,
                         .tracking = &b.tracking,
                         .spectrogram = b.spectrogram,
                         .source_audio = b.source,
                         .source_rate_hz = rate_hz,
                         .render_audio = b.render,
                         .render_rate_hz = rate_hz,
                         .copy_in_source = b.copy_in_source,
                         .partials_in_source = b.copy_in_source,
                         .partials_audio = b.render,  // the patch has no noise bands
                         .noise_audio = {},
                         .source_name = "synthetic.wav",
                         .info_table = "name <test> & \"table\"",
                         .comparison = &b.comparison,
                         .comparison_note = {},
                         .comparison_from_s = 0.0};
        b.html = make_report_html(in);
        return b;
    }();
    return r;
}

}  // namespace

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
    a.level_db.assign(4 * 64, static_cast<float>(spectrogram_floor_db));
    for (int f = 0; f < 4; ++f) a.level_db[static_cast<std::size_t>(f * 64 + 20)] = -10.0f;  // 2 kHz
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

// The report page of the report tests, built once per test program from a synthetic note whose
// partials are known exactly (a patch rendered by the renderer, tracked by the tracker), and the
// tools that take it apart again: base64 decoded here (RFC 4648, written independently of the
// encoder), the PNG decoded by libpng's simplified reader, the WAVs by libsndfile.
#pragma once

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

namespace wane::test {

inline constexpr double rate_hz = 48000.0;
inline constexpr double f0_hz = 220.0;
inline constexpr int harmonics = 8;
inline constexpr double lead_in_s = 0.1;  // silence before the onset, as in a recording
inline constexpr double note_s = 4.0;     // the size requirement is stated for a 4 s note
inline constexpr std::size_t max_report_bytes = 10'000'000;  // issue 20: under 10 MB for a 4 s note

/// A plucked-string-like patch: harmonics 1..8 of 220 Hz, falling 4 dB per harmonic, each
/// decaying in two stages (faster first), as in patch format v1.
inline patch synthetic_patch() {
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
inline std::string base64_decode(std::string_view text) {
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
inline std::vector<std::string> data_uris(const std::string& html, const std::string& mime) {
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

inline std::size_t count(const std::string& text, const std::string& what) {
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

inline decoded_png decode_png(const std::string& bytes) {
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

inline decoded_wav decode_wav(const std::string& bytes) {
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
inline std::string section(const std::string& html, const std::string& id) {
    const std::size_t begin = html.find("<section id='" + id + "'");
    if (begin == std::string::npos) return {};
    const std::size_t end = html.find("</section>", begin);
    return html.substr(begin, end == std::string::npos ? std::string::npos : end - begin);
}

/// Value of attribute name='...' within one tag, or "".
inline std::string attribute(std::string_view tag, const std::string& name) {
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

inline const built_report& the_report() {
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

}  // namespace wane::test

// The patch writer (see patch_writer.hpp).
#include "io/patch_writer.hpp"

#include <cstdint>
#include <sstream>

#include "core/patch_numbers.hpp"
#include "core/pitch_names.hpp"

namespace wane {

using namespace patch_numbers;

namespace {

// ---------------------------------------------------------------------------------------------
// Strings.

/// Appends one UTF-8 code point.
void append_utf8(std::string& out, char32_t cp) {
    if (cp < 0x80) {
        out += static_cast<char>(cp);
    } else if (cp < 0x800) {
        out += static_cast<char>(0xC0 | (cp >> 6));
        out += static_cast<char>(0x80 | (cp & 0x3F));
    } else if (cp < 0x10000) {
        out += static_cast<char>(0xE0 | (cp >> 12));
        out += static_cast<char>(0x80 | ((cp >> 6) & 0x3F));
        out += static_cast<char>(0x80 | (cp & 0x3F));
    } else {
        out += static_cast<char>(0xF0 | (cp >> 18));
        out += static_cast<char>(0x80 | ((cp >> 12) & 0x3F));
        out += static_cast<char>(0x80 | ((cp >> 6) & 0x3F));
        out += static_cast<char>(0x80 | (cp & 0x3F));
    }
}

/// Decodes one UTF-8 code point at s[i]; returns its length, or 0 for an invalid sequence
/// (overlong forms, surrogates and values above U+10FFFF are invalid, as TOML requires).
std::size_t decode_utf8(std::string_view s, std::size_t i, char32_t& cp) {
    const auto byte = [&](std::size_t k) { return static_cast<unsigned char>(s[k]); };
    const unsigned char b0 = byte(i);
    std::size_t len = 0;
    char32_t min_cp = 0;
    if (b0 < 0x80) {
        cp = b0;
        return 1;
    }
    if ((b0 & 0xE0) == 0xC0) {
        len = 2, cp = b0 & 0x1Fu, min_cp = 0x80;
    } else if ((b0 & 0xF0) == 0xE0) {
        len = 3, cp = b0 & 0x0Fu, min_cp = 0x800;
    } else if ((b0 & 0xF8) == 0xF0) {
        len = 4, cp = b0 & 0x07u, min_cp = 0x10000;
    } else {
        return 0;
    }
    if (i + len > s.size()) return 0;
    for (std::size_t k = 1; k < len; ++k) {
        if ((byte(i + k) & 0xC0) != 0x80) return 0;
        cp = (cp << 6) | (byte(i + k) & 0x3Fu);
    }
    if (cp < min_cp || cp > 0x10FFFF || (cp >= 0xD800 && cp <= 0xDFFF)) return 0;
    return len;
}

}  // namespace

std::string toml_string(std::string_view s) {
    std::string out = "\"";
    for (std::size_t i = 0; i < s.size();) {
        char32_t cp = 0;
        const std::size_t len = decode_utf8(s, i, cp);
        if (len == 0) {
            append_utf8(out, 0xFFFD);
            ++i;
            continue;
        }
        i += len;
        switch (cp) {
            case U'"': out += "\\\""; break;
            case U'\\': out += "\\\\"; break;
            case U'\b': out += "\\b"; break;
            case U'\t': out += "\\t"; break;
            case U'\n': out += "\\n"; break;
            case U'\f': out += "\\f"; break;
            case U'\r': out += "\\r"; break;
            default:
                if (cp < 0x20 || cp == 0x7F) {
                    char buf[8];
                    std::snprintf(buf, sizeof buf, "\\u%04X", static_cast<unsigned>(cp));
                    out += buf;
                } else {
                    append_utf8(out, cp);
                }
        }
    }
    out += '"';
    return out;
}

namespace {

constexpr const char* header_comment =
    "# wane patch: a note as damped partials. Times are seconds from the note's onset, levels dBFS,\n"
    "# frequencies Hz. Envelope: the amplitude rises linearly from 0 to peak_db over attack_s; then each\n"
    "# decay segment falls 60 dB per t60_s (inf holds the level, negative rises) until its until_s, and\n"
    "# the last segment runs to the end. Edit freely; wane validates on load (see patches/README.md).\n";

void write_envelope(std::ostringstream& out, const envelope& env) {
    out << "attack_s = " << fmt_time(env.attack_s) << '\n';
    out << "peak_db = " << fmt_level(env.peak.db) << '\n';
    out << "decay = [ ";
    for (std::size_t i = 0; i < env.decay.size(); ++i) {
        const decay_segment& seg = env.decay[i];
        if (i) out << ", ";
        out << "{ t60_s = " << fmt_t60(seg.t60_s);
        if (seg.until_s) out << ", until_s = " << fmt_time(*seg.until_s);
        out << " }";
    }
    out << " ]\n";
}

}  // namespace

std::string format_text(const patch& p) {
    std::ostringstream out;
    out << header_comment << '\n';
    out << "format = " << toml_string(patch_format_name) << '\n';
    out << "version = " << written_format_version(p) << '\n';
    out << "\n[note]\n";
    out << "name = " << toml_string(p.note.name) << '\n';
    out << "f0_hz = " << fmt_freq(p.note.f0_hz) << '\n';
    out << "length_s = " << fmt_time(p.note.length_s) << '\n';
    out << "inharmonicity_b = " << fmt_b(p.note.inharmonicity_b) << '\n';
    out << "gain_db = " << fmt_level(p.note.gain_db) << '\n';
    if (is_stereo(p)) out << "channels = " << p.note.channels << '\n';
    if (p.note.root.method == root_method::unpitched) {
        out << "root_found_by = " << toml_string(root_method_name(p.note.root.method)) << '\n';
    } else if (p.note.root.method != root_method::unstated) {
        out << "root = " << toml_string(note_name(p.note.root.midi)) << '\n';
        out << "tuning_cents = " << fmt_cents(p.note.root.tuning_cents) << '\n';
        out << "a4_hz = " << fmt_a4(p.note.root.a4_hz) << '\n';
        out << "root_found_by = " << toml_string(root_method_name(p.note.root.method)) << '\n';
    }
    out << "\n[source]\n";
    out << "file = " << toml_string(p.source.file) << '\n';
    out << "sample_rate_hz = " << fmt_rate(p.source.sample_rate_hz) << '\n';
    out << "onset_s = " << fmt_align(p.source.onset_s) << '\n';
    if (p.source.cut_s) out << "cut_s = " << fmt_time(*p.source.cut_s) << '\n';
    if (p.source.analysis) {
        const analysis_settings& a = *p.source.analysis;
        out << "\n[source.analysis]\n";
        out << "window = " << toml_string(a.window) << '\n';
        out << "fft_size = " << a.fft_size << '\n';
        out << "window_s = " << fmt_align(a.window_s) << '\n';
        out << "hop_s = " << fmt_align(a.hop_s) << '\n';
    }
    for (const partial& q : p.partials) {
        out << "\n[[partial]]\n";
        out << "freq_hz = " << fmt_freq(q.freq_hz) << '\n';
        out << "harmonic = " << q.harmonic << '\n';
        out << "phase_rad = " << fmt_phase(q.phase_rad) << '\n';
        if (is_stereo(p)) {
            out << "pan = " << fmt_pan(q.place.pan) << '\n';
            out << "delay_us = " << fmt_delay_us(q.place.delay_us) << '\n';
            if (q.place.spread_db_per_s != 0.0) out << "spread_db_per_s = " << fmt_spread(q.place.spread_db_per_s) << '\n';
        }
        if (q.glide_cents != 0.0) {
            out << "glide_cents = " << fmt_cents(q.glide_cents) << '\n';
            out << "glide_s = " << fmt_glide_s(q.glide_s) << '\n';
        }
        write_envelope(out, q.env);
    }
    for (const noise_band& b : p.noise) {
        out << "\n[[noise]]\n";
        out << "low_hz = " << fmt_band_edge(b.low_hz) << '\n';
        out << "high_hz = " << fmt_band_edge(b.high_hz) << '\n';
        if (is_stereo(p)) {
            out << "pan = " << fmt_pan(b.place.pan) << '\n';
            out << "coherence = " << fmt_coherence(b.coherence) << '\n';
            if (b.place.spread_db_per_s != 0.0) out << "spread_db_per_s = " << fmt_spread(b.place.spread_db_per_s) << '\n';
        }
        write_envelope(out, b.env);
    }
    return out.str();
}

}  // namespace wane

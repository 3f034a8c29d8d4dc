// The patch format's TOML mapping (format "wane-patch", version 2; version 1 is read too).
//
// Reading: toml++ parses the text; every key is then read with its type checked, its source position
// recorded under a path like "partial[3].decay[2].t60_s" (1-based, as `wane info` numbers them),
// and the whole model goes through one validator (struct validator), once as written and once
// rounded to the file's precision. Errors carry "file:line:col: partial 3: decay[2].t60_s must not
// be 0". Unknown keys are the only findings that do not stop the read: they come back as warnings
// naming the nearest known key. The model returned is rounded and in canonical order, so
// parse(format(p)) == p for every patch the reader returns.
//
// Writing: the text is produced here, not by toml++'s formatter, with one fixed number format per
// quantity (see the `fmt_*` helpers for the precision each needs and why), so that reading a file the
// writer wrote and writing it again gives the same bytes.
#include "io/patch_toml.hpp"
#include "io/toml_guard.hpp"

#include <toml++/toml.h>

#include <algorithm>
#include <cassert>
#include <charconv>
#include <climits>
#include <cmath>
#include <cstdint>
#include <fstream>
#include <functional>
#include <map>
#include <optional>
#include <span>
#include <sstream>
#include <system_error>

#include "io/atomic_file.hpp"
#include "io/errors.hpp"

namespace wane {

namespace {

/// Files above this size are refused before parsing (a patch of 4096 partials with a few decay
/// segments each is well under 2 MB; the limit bounds memory and time on hostile input).
constexpr std::size_t max_patch_file_bytes = std::size_t{16} << 20;  // 16 MiB
constexpr const char* max_patch_file_text = "16 MiB";
/// Noise bands per patch (third-octave bands over 20 Hz..20 kHz are 31; this leaves wide room).
constexpr std::size_t max_noise_bands = 1024;
/// Decay segments per envelope (the fits use a handful; this bounds hand-made files).
constexpr std::size_t max_decay_segments = 64;
/// Bounds that keep every number meaningful and printable (the core asserts nothing beyond them):
/// frequencies up to 1 MHz (above any audio rate's Nyquist frequency);
constexpr double max_freq_hz = 1e6;
/// sample rates up to 10 MHz; source onsets up to 1e6 s (11.6 days into a recording);
constexpr double max_sample_rate_hz = 1e7;
constexpr double max_onset_s = 1e6;
/// levels down to -1000 dB (amplitude 1e-50, below float's smallest normal, -758 dB);
constexpr double min_level_db = -1000.0;
/// B up to 1 (real strings are near 1e-4; 1 already puts harmonic 10 a semitone sharp ten times over);
constexpr double max_inharmonicity_b = 1.0;
/// phases within +-1000 rad (the analysis writes them wrapped to [-pi, pi]);
constexpr double max_abs_phase_rad = 1000.0;
/// FFT sizes up to 2^24 samples; strings up to 4096 bytes (a long path);
constexpr int max_fft_size = 1 << 24;
constexpr std::size_t max_string_bytes = 4096;
/// a patch nests at most 4 levels (root > partial array > partial > decay array > segment); deeper
/// structures are refused before they are walked.
constexpr int max_nesting_depth = 4;
/// Longest line: a [[partial]] with 64 decay segments takes about 3 KB, a 4096-byte string
/// written with \uXXXX escapes 25 KB; 64 KiB bounds the parser's work on one line (our choice).
constexpr std::size_t max_line_bytes = std::size_t{64} << 10;

// ---------------------------------------------------------------------------------------------
// Number formatting (locale independent: std::to_chars).

/// Fixed notation with `decimals` digits after the point; "inf"/"-inf" for infinities (TOML
/// spelling); a negative zero prints without its sign so "-0.000" never appears.
std::string fmt_fixed(double v, int decimals) {
    if (std::isinf(v)) return v > 0 ? "inf" : "-inf";
    if (std::isnan(v)) return "nan";
    char buf[512];  // fixed notation of the largest double needs 309 digits + decimals
    const auto res = std::to_chars(buf, buf + sizeof buf, v, std::chars_format::fixed, decimals);
    assert(res.ec == std::errc{});
    std::string s(buf, res.ptr);
    if (s.front() == '-' && s.find_first_not_of("-0.") == std::string::npos) s.erase(0, 1);
    return s;
}

/// Scientific notation with `digits` digits after the point, e.g. "2.1000e-04" (valid TOML).
std::string fmt_sci(double v, int digits) {
    if (std::isinf(v)) return v > 0 ? "inf" : "-inf";
    char buf[64];
    const auto res = std::to_chars(buf, buf + sizeof buf, v, std::chars_format::scientific, digits);
    assert(res.ec == std::errc{});
    std::string s(buf, res.ptr);
    if (s.front() == '-' && v == 0.0) s.erase(0, 1);
    return s;
}

// Precision per quantity (decimals after the point):
/// Partial and f0 frequencies: 1e-6 Hz. The rounding error (<= 5e-7 Hz) drifts the phase by at
/// most 5e-7 Hz * 10 s = 5e-6 cycles (3e-5 rad) over a 10 s note: coherent with the source.
constexpr int freq_decimals = 6;
/// Noise band edges: 0.01 Hz, far finer than any band-pass edge is meaningful.
constexpr int band_edge_decimals = 2;
/// Phase: 1e-5 rad; the rounding error (5e-6 rad) is a -106 dB error vector on the partial.
constexpr int phase_decimals = 5;
/// Envelope times and length: 0.1 ms. Finer than the analysis hop (a few ms) that measures them
/// and than the ear's temporal resolution of a few ms (common practice, no source).
constexpr int time_decimals = 4;
/// Alignment times (onset in the source, window and hop): 1 us, below one sample period even at
/// 192 kHz (5.2 us), so the patch can be lined up with its source sample-accurately.
constexpr int align_decimals = 6;
/// Levels and gains: 0.01 dB (0.12 % in amplitude).
constexpr int level_decimals = 2;
/// T60s: 0.1 ms, like the other envelope times (0.1 % of a 0.1 s decay).
constexpr int t60_decimals = 4;
/// Inharmonicity B: 5 significant digits in scientific notation (B spans 1e-6..1e-2).
constexpr int b_digits = 4;
/// Root tuning: 0.001 cent, so placing the root on a note leaves at most 0.0005 cent of rounding.
constexpr int cents_decimals = 3;
/// A4 of the root's equal temperament: 0.001 Hz (0.004 cent at 440 Hz).
constexpr int a4_decimals = 3;
/// Range of the root's tuning and of A4 (a root is the nearest note, so |cents| <= 50 when wane
/// writes it; by hand up to a semitone either way).
constexpr double max_tuning_cents = 100.0;
constexpr double min_a4_hz = 100.0;
constexpr double max_a4_hz = 1000.0;

// One formatter per quantity; the writer prints with them and the reader rounds with them.
std::string fmt_freq(double v) { return fmt_fixed(v, freq_decimals); }
std::string fmt_band_edge(double v) { return fmt_fixed(v, band_edge_decimals); }
std::string fmt_phase(double v) { return fmt_fixed(v, phase_decimals); }
std::string fmt_time(double v) { return fmt_fixed(v, time_decimals); }
std::string fmt_align(double v) { return fmt_fixed(v, align_decimals); }
std::string fmt_level(double v) { return fmt_fixed(v, level_decimals); }
std::string fmt_t60(double v) { return fmt_fixed(v, t60_decimals); }
std::string fmt_b(double v) { return fmt_sci(v, b_digits); }
std::string fmt_cents(double v) { return fmt_fixed(v, cents_decimals); }
std::string fmt_a4(double v) { return fmt_fixed(v, a4_decimals); }

/// A sample rate: an integer when it is one (at 1e-6 Hz resolution), e.g. "48000".
std::string fmt_rate(double v) {
    std::string s = fmt_fixed(v, freq_decimals);
    const std::string zeros = "." + std::string(freq_decimals, '0');
    if (s.size() > zeros.size() && s.compare(s.size() - zeros.size(), zeros.size(), zeros) == 0) {
        s.erase(s.size() - zeros.size());
    }
    return s;
}

using formatter = std::string (*)(double);

/// The value the file will hold: v printed with its quantity's format and read back.
double rounded(double v, formatter fmt) {
    if (std::isnan(v)) return v;
    const std::string text = fmt(v);
    double out = 0.0;
    const auto res = std::from_chars(text.data(), text.data() + text.size(), out);
    assert(res.ec == std::errc{});
    (void)res;
    return out;
}

void round_envelope(envelope& env) {
    env.attack_s = rounded(env.attack_s, fmt_time);
    env.peak.db = rounded(env.peak.db, fmt_level);
    for (decay_segment& seg : env.decay) {
        seg.t60_s = rounded(seg.t60_s, fmt_t60);
        if (seg.until_s) seg.until_s = rounded(*seg.until_s, fmt_time);
    }
}

/// Rounds every number to the precision the file keeps, so that reading a patch gives exactly the
/// model the writer would write: parse(format(p)) == p for every patch the reader returns.
void round_to_file_precision(patch& p) {
    p.note.f0_hz = rounded(p.note.f0_hz, fmt_freq);
    p.note.length_s = rounded(p.note.length_s, fmt_time);
    p.note.inharmonicity_b = rounded(p.note.inharmonicity_b, fmt_b);
    p.note.gain_db = rounded(p.note.gain_db, fmt_level);
    p.note.root.tuning_cents = rounded(p.note.root.tuning_cents, fmt_cents);
    p.note.root.a4_hz = rounded(p.note.root.a4_hz, fmt_a4);
    p.source.sample_rate_hz = rounded(p.source.sample_rate_hz, fmt_rate);
    p.source.onset_s = rounded(p.source.onset_s, fmt_align);
    if (p.source.analysis) {
        p.source.analysis->window_s = rounded(p.source.analysis->window_s, fmt_align);
        p.source.analysis->hop_s = rounded(p.source.analysis->hop_s, fmt_align);
    }
    for (partial& q : p.partials) {
        q.freq_hz = rounded(q.freq_hz, fmt_freq);
        q.phase_rad = rounded(q.phase_rad, fmt_phase);
        round_envelope(q.env);
    }
    for (noise_band& b : p.noise) {
        b.low_hz = rounded(b.low_hz, fmt_band_edge);
        b.high_hz = rounded(b.high_hz, fmt_band_edge);
        round_envelope(b.env);
    }
}

/// Shortest round-trip text of a number, for messages.
std::string show(double v) {
    if (std::isnan(v)) return "nan";
    if (std::isinf(v)) return v > 0 ? "inf" : "-inf";
    char buf[64];
    const auto res = std::to_chars(buf, buf + sizeof buf, v);
    return std::string(buf, res.ptr);
}

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

/// A TOML basic string: quotes, backslash and control characters escaped; invalid UTF-8 bytes
/// (possible in file names) become U+FFFD so the file always parses.
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

// ---------------------------------------------------------------------------------------------
// Paths and messages.
//
// A path names a value: "note.length_s", "source.analysis.hop_s", "partial[3].decay[2].t60_s",
// "noise[1].low_hz" (indices 1-based). Messages show it as "partial 3: decay[2].t60_s ...".

std::string indexed(std::string_view name, std::size_t index0) {
    return std::string(name) + "[" + std::to_string(index0 + 1) + "]";
}

/// "partial[3].decay[2].t60_s" -> "partial 3: decay[2].t60_s"; "note.f0_hz" stays.
std::string display(const std::string& path) {
    for (const char* list : {"partial[", "noise["}) {
        const std::string_view prefix(list);
        if (path.compare(0, prefix.size(), prefix) == 0) {
            const std::size_t close = path.find(']');
            std::string out = std::string(prefix.substr(0, prefix.size() - 1)) + " " +
                              path.substr(prefix.size(), close - prefix.size());
            if (close + 1 < path.size()) out += ": " + path.substr(close + 2);
            return out;
        }
    }
    return path;
}

/// Reports a rule broken at `path`; `what` continues the sentence ("must not be 0"). Throws.
using fail_fn = std::function<void(const std::string& path, const std::string& what)>;

// ---------------------------------------------------------------------------------------------
// The rules, over the model (used by the reader with source positions, by the writer without).

struct validator {
    fail_fn fail;

    void not_nan(const std::string& path, double v) const {
        if (std::isnan(v)) fail(path, "must not be NaN");
    }
    void finite(const std::string& path, double v) const {
        not_nan(path, v);
        if (std::isinf(v)) fail(path, "must be finite, not " + show(v));
    }
    /// lo <= v <= hi (lo < v when open_low).
    void within(const std::string& path, double v, double lo, double hi, const char* unit,
                bool open_low = false) const {
        finite(path, v);
        const bool low_ok = open_low ? v > lo : v >= lo;
        if (!low_ok || !(v <= hi)) {
            fail(path, std::string("must be in ") + (open_low ? "(" : "[") + show(lo) + ", " + show(hi) + "]" + unit +
                           ", not " + show(v));
        }
    }
    void text(const std::string& path, const std::string& s) const {
        if (s.size() > max_string_bytes) {
            fail(path, "is " + std::to_string(s.size()) + " bytes long; at most " + std::to_string(max_string_bytes) +
                           " are allowed");
        }
    }

    void check_envelope(const std::string& base, const envelope& env) const {
        not_nan(base + ".attack_s", env.attack_s);
        if (env.attack_s < 0.0) fail(base + ".attack_s", "must be >= 0, not " + show(env.attack_s));
        within(base + ".attack_s", env.attack_s, 0.0, max_length_s, " s");
        finite(base + ".peak_db", env.peak.db);
        if (env.peak.db > max_peak_db) {
            fail(base + ".peak_db", "must be <= +" + show(max_peak_db) + " dB, not " + show(env.peak.db));
        }
        within(base + ".peak_db", env.peak.db, min_level_db, max_peak_db, " dB");
        if (env.decay.empty()) fail(base + ".decay", "needs at least one segment, e.g. [ { t60_s = 2.0 } ]");
        if (env.decay.size() > max_decay_segments) {
            fail(base + ".decay", "has " + std::to_string(env.decay.size()) + " segments; at most " +
                                      std::to_string(max_decay_segments) + " are allowed");
        }
        double prev_end_s = env.attack_s;
        std::string prev_name = "attack_s";
        for (std::size_t i = 0; i < env.decay.size(); ++i) {
            const decay_segment& seg = env.decay[i];
            const std::string seg_path = base + "." + indexed("decay", i);
            not_nan(seg_path + ".t60_s", seg.t60_s);
            if (seg.t60_s == 0.0) fail(seg_path + ".t60_s", "must not be 0 (use inf to hold the level)");
            const bool last = i + 1 == env.decay.size();
            if (last) {
                if (seg.until_s) {
                    fail(seg_path + ".until_s",
                         "is not allowed on the last segment, which runs to the end of the note");
                }
                break;
            }
            if (!seg.until_s) {
                fail(seg_path, "needs until_s (every segment but the last ends at its until_s)");
            }
            const double until_s = *seg.until_s;
            finite(seg_path + ".until_s", until_s);
            if (!(until_s > prev_end_s)) {
                fail(seg_path + ".until_s", "(" + show(until_s) + ") must be after " + prev_name + " (" +
                                                show(prev_end_s) + ")");
            }
            within(seg_path + ".until_s", until_s, 0.0, max_length_s, " s");
            prev_end_s = until_s;
            prev_name = indexed("decay", i) + ".until_s";
        }
    }

    void check(const patch& p) const {
        const note_info& n = p.note;
        text("note.name", n.name);
        within("note.f0_hz", n.f0_hz, 0.0, max_freq_hz, " Hz");
        within("note.length_s", n.length_s, 0.0, max_length_s, " s", true);
        within("note.inharmonicity_b", n.inharmonicity_b, 0.0, max_inharmonicity_b, "");
        within("note.gain_db", n.gain_db, min_level_db, max_peak_db, " dB");
        if (n.root.method != root_method::unstated && n.root.method != root_method::unpitched) {
            within("note.tuning_cents", n.root.tuning_cents, -max_tuning_cents, max_tuning_cents, " cents");
            within("note.a4_hz", n.root.a4_hz, min_a4_hz, max_a4_hz, " Hz");
        }

        text("source.file", p.source.file);
        within("source.sample_rate_hz", p.source.sample_rate_hz, 0.0, max_sample_rate_hz, " Hz");
        within("source.onset_s", p.source.onset_s, 0.0, max_onset_s, " s");
        if (p.source.analysis) {
            const analysis_settings& a = *p.source.analysis;
            text("source.analysis.window", a.window);
            within("source.analysis.fft_size", a.fft_size, 1.0, max_fft_size, "");
            within("source.analysis.window_s", a.window_s, 0.0, max_length_s, " s", true);
            within("source.analysis.hop_s", a.hop_s, 0.0, max_length_s, " s", true);
        }

        if (p.partials.size() > max_partials) {
            fail("partial", "has " + std::to_string(p.partials.size()) + " entries; at most " +
                                std::to_string(max_partials) + " partials are allowed");
        }
        if (p.noise.size() > max_noise_bands) {
            fail("noise", "has " + std::to_string(p.noise.size()) + " entries; at most " +
                              std::to_string(max_noise_bands) + " noise bands are allowed");
        }
        if (p.partials.empty() && p.noise.empty()) {
            fail("", "the patch has no [[partial]] and no [[noise]] tables: nothing to render");
        }
        for (std::size_t i = 0; i < p.partials.size(); ++i) {
            const partial& q = p.partials[i];
            const std::string base = indexed("partial", i);
            not_nan(base + ".freq_hz", q.freq_hz);
            if (!(q.freq_hz > 0.0)) fail(base + ".freq_hz", "must be > 0, not " + show(q.freq_hz));
            within(base + ".freq_hz", q.freq_hz, 0.0, max_freq_hz, " Hz", true);
            if (q.harmonic < 0) fail(base + ".harmonic", "must be >= 0 (0 = not on the harmonic series), not " +
                                                             std::to_string(q.harmonic));
            within(base + ".phase_rad", q.phase_rad, -max_abs_phase_rad, max_abs_phase_rad, " rad");
            check_envelope(base, q.env);
        }
        for (std::size_t i = 0; i < p.noise.size(); ++i) {
            const noise_band& b = p.noise[i];
            const std::string base = indexed("noise", i);
            within(base + ".low_hz", b.low_hz, 0.0, max_freq_hz, " Hz");
            finite(base + ".high_hz", b.high_hz);
            if (!(b.high_hz > b.low_hz)) {
                fail(base + ".high_hz", "(" + show(b.high_hz) + ") must be above low_hz (" + show(b.low_hz) + ")");
            }
            within(base + ".high_hz", b.high_hz, 0.0, max_freq_hz, " Hz");
            check_envelope(base, b.env);
        }
    }
};

/// Validates p as given, then rounded to the file's precision (rounding can merge two breakpoints
/// or turn a tiny T60 into 0). Leaves p rounded.
void validate_and_round(patch& p, const fail_fn& fail) {
    validator{fail}.check(p);
    round_to_file_precision(p);
    validator{[&fail](const std::string& path, const std::string& what) {
        fail(path, what + " once rounded to the precision the file keeps");
    }}.check(p);
}

// ---------------------------------------------------------------------------------------------
// Unknown keys: nearest known key by edit distance (optimal string alignment: insertions,
// deletions, substitutions and adjacent transpositions each cost 1).

std::size_t edit_distance(std::string_view a, std::string_view b) {
    std::vector<std::vector<std::size_t>> d(a.size() + 1, std::vector<std::size_t>(b.size() + 1));
    for (std::size_t i = 0; i <= a.size(); ++i) d[i][0] = i;
    for (std::size_t j = 0; j <= b.size(); ++j) d[0][j] = j;
    for (std::size_t i = 1; i <= a.size(); ++i) {
        for (std::size_t j = 1; j <= b.size(); ++j) {
            const std::size_t cost = a[i - 1] == b[j - 1] ? 0 : 1;
            d[i][j] = std::min({d[i - 1][j] + 1, d[i][j - 1] + 1, d[i - 1][j - 1] + cost});
            if (i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1]) {
                d[i][j] = std::min(d[i][j], d[i - 2][j - 2] + 1);
            }
        }
    }
    return d[a.size()][b.size()];
}

/// Longest key compared for a suggestion (longer unknown keys just list the known ones).
constexpr std::size_t max_suggest_key_chars = 64;

/// Whether `typed` is plausibly a misspelling of `known`: the unit suffix left out ("t60" for
/// "t60_s", "phase" for "phase_rad"), or at most about a third of the characters edited (1..3).
bool looks_like(std::string_view typed, std::string_view known) {
    if (typed.size() > max_suggest_key_chars) return false;
    if (known.size() > typed.size() && known.substr(0, typed.size()) == typed && known[typed.size()] == '_') {
        return true;
    }
    const std::size_t limit = std::clamp<std::size_t>(std::max(typed.size(), known.size()) / 3, 1, 3);
    return edit_distance(typed, known) <= limit;
}

std::string unknown_key_text(std::string_view key, std::span<const std::string_view> known) {
    std::string out = "unknown key '" + std::string(key) + "'";
    std::string_view best;
    std::size_t best_d = SIZE_MAX;
    for (std::string_view k : known) {
        if (!looks_like(key, k)) continue;
        const std::size_t dist = edit_distance(key, k);
        if (dist < best_d) best_d = dist, best = k;
    }
    if (!best.empty()) return out + " (did you mean '" + std::string(best) + "'?)";
    out += " (known keys here: ";
    for (std::size_t i = 0; i < known.size(); ++i) out += (i ? ", " : "") + std::string(known[i]);
    return out + ")";
}

constexpr std::string_view top_keys[] = {"format", "version", "note", "source", "partial", "noise"};
constexpr std::string_view note_keys[] = {"name", "f0_hz", "length_s", "inharmonicity_b", "gain_db",
                                          "root", "tuning_cents", "a4_hz", "root_found_by"};
constexpr std::string_view source_keys[] = {"file", "sample_rate_hz", "onset_s", "analysis"};
constexpr std::string_view analysis_keys[] = {"window", "fft_size", "window_s", "hop_s"};
constexpr std::string_view partial_keys[] = {"freq_hz", "harmonic", "phase_rad", "attack_s", "peak_db", "decay"};
constexpr std::string_view noise_keys[] = {"low_hz", "high_hz", "attack_s", "peak_db", "decay"};
constexpr std::string_view segment_keys[] = {"t60_s", "until_s"};

/// The table a known key belongs to, for a key written in the wrong table (nullptr if none).
const char* home_of(std::string_view key) {
    const auto in = [key](std::span<const std::string_view> keys) {
        return std::find(keys.begin(), keys.end(), key) != keys.end();
    };
    if (in(top_keys)) return "the top level, before [note]";
    if (in(note_keys)) return "[note]";
    if (in(source_keys)) return "[source]";
    if (in(analysis_keys)) return "[source.analysis]";
    if (in(partial_keys)) return "a [[partial]]";
    if (in(noise_keys)) return "a [[noise]]";
    if (in(segment_keys)) return "a decay segment";
    return nullptr;
}

const char* type_name(toml::node_type t) {
    switch (t) {
        case toml::node_type::string: return "a string";
        case toml::node_type::integer: return "an integer";
        case toml::node_type::floating_point: return "a float";
        case toml::node_type::boolean: return "a boolean";
        case toml::node_type::table: return "a table";
        case toml::node_type::array: return "an array";
        case toml::node_type::date: return "a date";
        case toml::node_type::time: return "a time";
        case toml::node_type::date_time: return "a date-time";
        default: return "nothing";
    }
}

// ---------------------------------------------------------------------------------------------
// The reader.

struct position {
    std::uint32_t line = 0;
    std::uint32_t column = 0;
};

class reader {
public:
    explicit reader(std::string_view source_name) : name_(source_name) {}

    patch_read_result read(const toml::table& root) {
        root_pos_ = pos_of(root);
        check_format(root);
        warn_unknown(root, "", top_keys);

        patch p;
        p.version = patch_format_version;
        const toml::table& note = required_table(root, "note", "note");
        expect_keys(note, note_keys);
        p.note.name = get_string(note, "name", "note.name").value_or("");
        p.note.f0_hz = required_number(note, "f0_hz", "note.f0_hz");
        p.note.length_s = required_number(note, "length_s", "note.length_s");
        p.note.inharmonicity_b = get_number(note, "inharmonicity_b", "note.inharmonicity_b").value_or(0.0);
        p.note.gain_db = get_number(note, "gain_db", "note.gain_db").value_or(0.0);
        read_root(note, p.note);
        warn_unknown(note, "note", note_keys);

        if (const toml::table* src = optional_table(root, "source", "source")) {
            p.source.file = get_string(*src, "file", "source.file").value_or("");
            p.source.sample_rate_hz = get_number(*src, "sample_rate_hz", "source.sample_rate_hz").value_or(0.0);
            p.source.onset_s = get_number(*src, "onset_s", "source.onset_s").value_or(0.0);
            if (const toml::table* an = optional_table(*src, "analysis", "source.analysis")) {
                expect_keys(*an, analysis_keys);
                analysis_settings a;
                a.window = get_string(*an, "window", "source.analysis.window").value_or("");
                a.fft_size = required_int(*an, "fft_size", "source.analysis.fft_size");
                a.window_s = required_number(*an, "window_s", "source.analysis.window_s");
                a.hop_s = required_number(*an, "hop_s", "source.analysis.hop_s");
                warn_unknown(*an, "source.analysis", analysis_keys);
                p.source.analysis = a;
            }
            warn_unknown(*src, "source", source_keys);
        }

        for_each_table(root, "partial", max_partials, [&](const toml::table& t, const std::string& base) {
            expect_keys(t, partial_keys);
            partial q;
            q.freq_hz = required_number(t, "freq_hz", base + ".freq_hz");
            q.harmonic = get_int(t, "harmonic", base + ".harmonic").value_or(0);
            q.phase_rad = get_number(t, "phase_rad", base + ".phase_rad").value_or(0.0);
            q.env = read_envelope(t, base);
            warn_unknown(t, base, partial_keys);
            p.partials.push_back(std::move(q));
        });
        for_each_table(root, "noise", max_noise_bands, [&](const toml::table& t, const std::string& base) {
            expect_keys(t, noise_keys);
            noise_band b;
            b.low_hz = required_number(t, "low_hz", base + ".low_hz");
            b.high_hz = required_number(t, "high_hz", base + ".high_hz");
            b.env = read_envelope(t, base);
            warn_unknown(t, base, noise_keys);
            p.noise.push_back(std::move(b));
        });

        validate_and_round(p, [this](const std::string& path, const std::string& what) { fail(path, what); });
        // Messages above count partials in file order; the model is handed out in canonical order
        // (the same for any file wane wrote), so that parse(format(p)) == p for every p read.
        canonicalize(p);
        return patch_read_result{.value = std::move(p), .warnings = std::move(warnings_)};
    }

private:
    std::string name_;
    std::map<std::string, position> where_;
    position root_pos_{1, 1};
    std::vector<std::string> warnings_;

    static position pos_of(const toml::node& n) { return {n.source().begin.line, n.source().begin.column}; }
    static position pos_of(const toml::key& k) { return {k.source().begin.line, k.source().begin.column}; }

    std::string at(position pos) const {
        if (pos.line == 0) return name_ + ": ";
        return name_ + ":" + std::to_string(pos.line) + ":" + std::to_string(pos.column) + ": ";
    }

    /// The recorded position of path, or of its nearest recorded parent, or of the file start.
    std::string at_path(std::string path) const {
        while (!path.empty()) {
            if (auto it = where_.find(path); it != where_.end()) return at(it->second);
            const std::size_t cut = path.find_last_of(".[");
            path = cut == std::string::npos ? std::string() : path.substr(0, cut);
        }
        return at(root_pos_);
    }

    [[noreturn]] void fail(const std::string& path, const std::string& what) const {
        const std::string shown = display(path);
        if (shown.empty()) throw patch_error(at_path(path) + what);
        // A message that starts with '(' continues the key ("decay[2].until_s (0.5) must ..."),
        // otherwise it is a sentence about the key.
        throw patch_error(at_path(path) + shown + " " + what);
    }

    /// "partial 3: " style context for messages about a table (empty at top level).
    [[noreturn]] void fail_in(const std::string& table_path, const std::string& sentence) const {
        std::string shown = display(table_path);
        throw patch_error(at_path(table_path) + (shown.empty() ? "" : shown + ": ") + sentence);
    }

    void record(const std::string& path, const toml::node& n) { where_[path] = pos_of(n); }

    void check_format(const toml::table& root) {
        const toml::node* f = root.get("format");
        if (!f) {
            throw patch_error(at(root_pos_) + "not a wane patch: the key format = \"" +
                              std::string(patch_format_name) + "\" is missing");
        }
        record("format", *f);
        const auto* s = f->as_string();
        if (!s || s->get() != patch_format_name) {
            const std::string got = s ? "'" + s->get() + "'" : type_name(f->type());
            fail("format", "is " + got + "; a wane patch has format = \"" + std::string(patch_format_name) + "\"");
        }
        const toml::node* v = root.get("version");
        if (!v) fail_in("", "the key version = " + std::to_string(patch_format_version) + " is missing");
        record("version", *v);
        const auto* iv = v->as_integer();
        if (!iv) fail("version", std::string("must be an integer, not ") + type_name(v->type()));
        const std::int64_t version = iv->get();
        if (version > patch_format_version) {
            fail("version", "is " + std::to_string(version) + ": this patch was made by a newer wane; this one reads versions " +
                                std::to_string(oldest_patch_format_version) + " to " + std::to_string(patch_format_version));
        }
        if (version < oldest_patch_format_version) {
            fail("version", "is " + std::to_string(version) + "; the versions are " +
                                std::to_string(oldest_patch_format_version) + " to " + std::to_string(patch_format_version));
        }
    }

    /// The root keys of [note] (version 2): root (a note name), tuning_cents, a4_hz, root_found_by.
    /// A root without root_found_by was set by hand; "unpitched" takes no root; the other methods
    /// need one. Without any of them the root is unstated (version 1): f0_hz serves.
    void read_root(const toml::table& note, note_info& n) {
        const auto name = get_string(note, "root", "note.root");
        const auto found_by = get_string(note, "root_found_by", "note.root_found_by");
        const auto cents = get_number(note, "tuning_cents", "note.tuning_cents");
        const auto a4 = get_number(note, "a4_hz", "note.a4_hz");
        if (found_by) {
            const auto m = parse_root_method(*found_by);
            if (!m || *m == root_method::unstated)
                fail("note.root_found_by", "is '" + *found_by + "'; one of harmonic-series, lowest-mode, strike-note, "
                                           "f0-hint, by-hand, unpitched");
            n.root.method = *m;
        }
        if (n.root.method == root_method::unpitched) {
            if (name) fail("note.root", "is given, but root_found_by = \"unpitched\" says the note has no root");
            if (cents || a4) fail(cents ? "note.tuning_cents" : "note.a4_hz", "needs a root; root_found_by = \"unpitched\"");
            return;
        }
        if (!name) {
            if (found_by) fail_in("note", "root_found_by = \"" + *found_by + "\" needs the key root (a note name such as C4)");
            if (cents || a4) fail(cents ? "note.tuning_cents" : "note.a4_hz", "needs the key root (a note name such as C4)");
            return;
        }
        const auto midi = parse_note_name(*name);
        if (!midi) fail("note.root", "is '" + *name + "'; a root is a note name such as C4, F#3 or Bb2 (C-1 to G9)");
        if (!found_by) n.root.method = root_method::by_hand;
        n.root.midi = *midi;
        n.root.tuning_cents = cents.value_or(0.0);
        n.root.a4_hz = a4.value_or(default_a4_hz);
    }

    void warn_unknown(const toml::table& t, const std::string& table_path, std::span<const std::string_view> known) {
        for (const auto& [k, node] : t) {
            (void)node;
            if (std::find(known.begin(), known.end(), k.str()) != known.end()) continue;
            const std::string shown = display(table_path);
            std::string text = at(pos_of(k)) + (shown.empty() ? "" : shown + ": ") + unknown_key_text(k.str(), known);
            if (const char* home = home_of(k.str())) text += "; '" + std::string(k.str()) + "' belongs in " + home;
            warnings_.push_back(std::move(text));
        }
    }

    /// The known keys of each table being read, for the hint on a missing key.
    std::map<const toml::table*, std::span<const std::string_view>> known_;

    void expect_keys(const toml::table& t, std::span<const std::string_view> known) { known_[&t] = known; }

    /// Error for a missing required key; points at an unknown key that looks like a typo of it.
    [[noreturn]] void missing(const toml::table& t, std::string_view key, const std::string& table_path,
                              const std::string& example = "") {
        std::string hint;
        if (const auto it = known_.find(&t); it != known_.end()) {
            for (const auto& [k, node] : t) {
                (void)node;
                const auto& known = it->second;
                if (std::find(known.begin(), known.end(), k.str()) != known.end()) continue;
                if (looks_like(k.str(), key)) {
                    hint = " (is '" + std::string(k.str()) + "' at line " + std::to_string(pos_of(k).line) +
                           " a misspelling of it?)";
                    break;
                }
            }
        }
        fail_in(table_path, "missing required key " + std::string(key) + (hint.empty() ? example : hint));
    }

    const toml::table* optional_table(const toml::table& t, std::string_view key, const std::string& path) {
        const toml::node* n = t.get(key);
        if (!n) return nullptr;
        record(path, *n);
        const toml::table* tt = n->as_table();
        if (!tt) fail(path, std::string("must be a table ([") + path + "]), not " + type_name(n->type()));
        return tt;
    }

    const toml::table& required_table(const toml::table& t, std::string_view key, const std::string& path) {
        const toml::table* tt = optional_table(t, key, path);
        if (!tt) fail_in("", "the table [" + path + "] is missing");
        return *tt;
    }

    std::optional<double> get_number(const toml::table& t, std::string_view key, const std::string& path) {
        const toml::node* n = t.get(key);
        if (!n) return std::nullopt;
        record(path, *n);
        if (const auto* f = n->as_floating_point()) {
            if (std::isnan(f->get())) fail(path, "must not be NaN");
            return f->get();
        }
        if (const auto* i = n->as_integer()) return static_cast<double>(i->get());
        fail(path, std::string("must be a number, not ") + type_name(n->type()));
    }

    double required_number(const toml::table& t, std::string_view key, const std::string& path) {
        const auto v = get_number(t, key, path);
        if (!v) missing(t, key, parent(path));
        return *v;
    }

    std::optional<int> get_int(const toml::table& t, std::string_view key, const std::string& path) {
        const toml::node* n = t.get(key);
        if (!n) return std::nullopt;
        record(path, *n);
        const auto* i = n->as_integer();
        if (!i) fail(path, std::string("must be an integer, not ") + type_name(n->type()));
        const std::int64_t v = i->get();
        if (v < INT_MIN || v > INT_MAX) fail(path, "is out of range (" + std::to_string(v) + ")");
        return static_cast<int>(v);
    }

    int required_int(const toml::table& t, std::string_view key, const std::string& path) {
        const auto v = get_int(t, key, path);
        if (!v) missing(t, key, parent(path));
        return *v;
    }

    std::optional<std::string> get_string(const toml::table& t, std::string_view key, const std::string& path) {
        const toml::node* n = t.get(key);
        if (!n) return std::nullopt;
        record(path, *n);
        const auto* s = n->as_string();
        if (!s) fail(path, std::string("must be a string, not ") + type_name(n->type()));
        return s->get();
    }

    static std::string parent(const std::string& path) {
        const std::size_t cut = path.find_last_of('.');
        return cut == std::string::npos ? std::string() : path.substr(0, cut);
    }

    /// Calls fn for each table of the array of tables `key` (written [[key]] or key = [ {...} ]).
    template <class Fn>
    void for_each_table(const toml::table& root, std::string_view key, std::size_t max_count, Fn&& fn) {
        const toml::node* n = root.get(key);
        if (!n) return;
        const std::string name(key);
        record(name, *n);
        const toml::array* arr = n->as_array();
        if (!arr) {
            fail(name, std::string("must be an array of tables (write each one as [[") + name + "]]), not " +
                           type_name(n->type()));
        }
        if (arr->size() > max_count) {
            fail(name, "has " + std::to_string(arr->size()) + " entries; at most " + std::to_string(max_count) +
                           " are allowed");
        }
        for (std::size_t i = 0; i < arr->size(); ++i) {
            const toml::node& e = *arr->get(i);
            const std::string base = indexed(name, i);
            record(base, e);
            const toml::table* t = e.as_table();
            if (!t) fail_in(base, std::string("must be a table, not ") + type_name(e.type()));
            fn(*t, base);
        }
    }

    envelope read_envelope(const toml::table& t, const std::string& base) {
        envelope env;
        env.attack_s = get_number(t, "attack_s", base + ".attack_s").value_or(0.0);
        env.peak = level_db{required_number(t, "peak_db", base + ".peak_db")};
        const toml::node* d = t.get("decay");
        if (!d) missing(t, "decay", base, ", e.g. decay = [ { t60_s = 2.0 } ]");
        const std::string dpath = base + ".decay";
        record(dpath, *d);
        const toml::array* arr = d->as_array();
        if (!arr) {
            fail(dpath, std::string("must be an array of segments like [ { t60_s = 1.9, until_s = 0.8 }, { t60_s = 6.4 } ], not ") +
                            type_name(d->type()));
        }
        if (arr->size() > max_decay_segments) {
            fail(dpath, "has " + std::to_string(arr->size()) + " segments; at most " +
                            std::to_string(max_decay_segments) + " are allowed");
        }
        for (std::size_t i = 0; i < arr->size(); ++i) {
            const toml::node& e = *arr->get(i);
            const std::string spath = base + "." + indexed("decay", i);
            record(spath, e);
            const toml::table* st = e.as_table();
            if (!st) fail(spath, std::string("must be a table like { t60_s = 1.9, until_s = 0.8 }, not ") + type_name(e.type()));
            expect_keys(*st, segment_keys);
            decay_segment seg;
            const auto t60 = get_number(*st, "t60_s", spath + ".t60_s");
            if (!t60) missing(*st, "t60_s", spath, " (use inf to hold the level)");
            seg.t60_s = *t60;
            seg.until_s = get_number(*st, "until_s", spath + ".until_s");
            warn_unknown(*st, spath, segment_keys);
            env.decay.push_back(seg);
        }
        return env;
    }
};

// ---------------------------------------------------------------------------------------------
// The writer.

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

std::string format_text(const patch& p) {
    std::ostringstream out;
    out << header_comment << '\n';
    out << "format = " << toml_string(patch_format_name) << '\n';
    out << "version = " << patch_format_version << '\n';
    out << "\n[note]\n";
    out << "name = " << toml_string(p.note.name) << '\n';
    out << "f0_hz = " << fmt_freq(p.note.f0_hz) << '\n';
    out << "length_s = " << fmt_time(p.note.length_s) << '\n';
    out << "inharmonicity_b = " << fmt_b(p.note.inharmonicity_b) << '\n';
    out << "gain_db = " << fmt_level(p.note.gain_db) << '\n';
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
        write_envelope(out, q.env);
    }
    for (const noise_band& b : p.noise) {
        out << "\n[[noise]]\n";
        out << "low_hz = " << fmt_band_edge(b.low_hz) << '\n';
        out << "high_hz = " << fmt_band_edge(b.high_hz) << '\n';
        write_envelope(out, b.env);
    }
    return out.str();
}

/// Refuses structures nested deeper than a patch has, before the reader walks them.
void check_depth(const toml::node& n, int depth, const std::string& source_name) {
    if (!n.is_table() && !n.is_array()) return;
    if (depth > max_nesting_depth) {
        const auto& b = n.source().begin;
        throw patch_error(source_name + ":" + std::to_string(b.line) + ":" + std::to_string(b.column) +
                          ": tables and arrays nest more than " + std::to_string(max_nesting_depth) +
                          " levels deep here, deeper than any patch");
    }
    if (const toml::table* t = n.as_table()) {
        for (const auto& [k, child] : *t) {
            (void)k;
            check_depth(child, depth + 1, source_name);
        }
    } else if (const toml::array* a = n.as_array()) {
        for (const toml::node& child : *a) check_depth(child, depth + 1, source_name);
    }
}

/// Counts [[partial]] and [[noise]] header lines before parsing, so a file with far too many is
/// refused in linear time without building its tree (a header inside a multi-line string would
/// count too; no valid patch has thousands of those).
void prescan_counts(std::string_view text, const std::string& source_name) {
    std::size_t partials = 0;
    std::size_t bands = 0;
    std::size_t line = 1;
    for (std::size_t i = 0; i < text.size(); ++line) {
        std::size_t eol = text.find('\n', i);
        if (eol == std::string_view::npos) eol = text.size();
        std::string_view l = text.substr(i, eol - i);
        i = eol + 1;
        const std::size_t first = l.find_first_not_of(" \t");
        if (first == std::string_view::npos || l.substr(first, 2) != "[[") continue;
        l.remove_prefix(first + 2);
        const std::size_t close = l.find("]]");
        if (close == std::string_view::npos) continue;
        l = l.substr(0, close);
        const std::size_t a = l.find_first_not_of(" \t");
        const std::size_t b = l.find_last_not_of(" \t");
        if (a == std::string_view::npos) continue;
        const std::string_view name = l.substr(a, b - a + 1);
        const bool too_many = (name == "partial" && ++partials > max_partials) ||
                              (name == "noise" && ++bands > max_noise_bands);
        if (too_many) {
            const bool is_partial = name == "partial";
            throw patch_error(source_name + ":" + std::to_string(line) + ":" + std::to_string(first + 1) +
                              ": more than " + std::to_string(is_partial ? max_partials : max_noise_bands) +
                              (is_partial ? " [[partial]] tables; at most " : " [[noise]] tables; at most ") +
                              std::to_string(is_partial ? max_partials : max_noise_bands) + " are allowed");
        }
    }
}

}  // namespace

patch_read_result parse_patch(std::string_view text, std::string_view source_name) {
    const std::string name(source_name);
    if (text.size() > max_patch_file_bytes) {
        throw patch_error(name + ": " + std::to_string(text.size()) + " bytes is larger than the " +
                          max_patch_file_text + " a patch may have");
    }
    guard_toml_text(text, name, {.max_nesting_depth = max_nesting_depth, .max_line_bytes = max_line_bytes});
    prescan_counts(text, name);
    toml::table root;
    try {
        root = toml::parse(text, name);
    } catch (const toml::parse_error& e) {
        const auto& b = e.source().begin;
        throw patch_error(name + ":" + std::to_string(b.line) + ":" + std::to_string(b.column) +
                          ": not valid TOML: " + std::string(e.description()));
    }
    check_depth(root, 0, name);
    reader r(source_name);
    return r.read(root);
}

patch_read_result read_patch_file(const std::filesystem::path& path) {
    const std::string name = path.string();
    std::error_code ec;
    const auto size = std::filesystem::file_size(path, ec);
    if (ec) throw io_error(name + ": cannot read: " + ec.message());
    if (size > max_patch_file_bytes) {
        throw patch_error(name + ": " + std::to_string(size) + " bytes is larger than the " + max_patch_file_text +
                          " a patch may have");
    }
    std::ifstream in(path, std::ios::binary);
    if (!in) throw io_error(name + ": cannot open for reading");
    std::string text(static_cast<std::size_t>(size), '\0');
    in.read(text.data(), static_cast<std::streamsize>(size));
    if (static_cast<std::size_t>(in.gcount()) != size) throw io_error(name + ": read failed");
    return parse_patch(text, name);
}

std::string format_patch(const patch& p) {
    patch sorted = p;
    canonicalize(sorted);
    validate_and_round(sorted, [](const std::string& path, const std::string& what) {
        const std::string shown = display(path);
        throw patch_error("patch to write is invalid: " + (shown.empty() ? what : shown + " " + what));
    });
    return format_text(sorted);
}

void write_patch_file(const std::filesystem::path& path, const patch& p) {
    write_file_atomic(path, format_patch(p));
}

}  // namespace wane

// The patch format's rules (see patch_rules.hpp).
#include "core/patch_rules.hpp"

#include <cmath>

#include "core/glide.hpp"
#include "core/patch_numbers.hpp"
#include "core/stereo.hpp"

namespace wane::patch_rules {

using patch_numbers::show;

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

namespace {

/// "(" + text + ")", built by appending (GCC 12 gives a false -Wrestrict for "(" + std::string).
std::string in_parens(const std::string& text) {
    std::string out;
    out.reserve(text.size() + 2);
    out.push_back('(');
    out.append(text);
    out.push_back(')');
    return out;
}

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
                fail(seg_path + ".until_s", in_parens(show(until_s)) + " must be after " + prev_name + " (" +
                                                show(prev_end_s) + ")");
            }
            within(seg_path + ".until_s", until_s, 0.0, max_length_s, " s");
            prev_end_s = until_s;
            prev_name = indexed("decay", i) + ".until_s";
        }
    }

    /// The stereo keys: in range in a stereo patch, absent (at their defaults) in a mono one.
    void check_place(const std::string& base, const stereo_place& place, bool stereo) const {
        if (!stereo) {
            const char* key = place.pan != 0.0 ? "pan" : place.delay_us != 0.0 ? "delay_us"
                              : place.spread_db_per_s != 0.0 ? "spread_db_per_s" : nullptr;
            if (key) fail(base + "." + key, "is a stereo key; this patch is mono (stereo patches have channels = 2 in [note])");
            return;
        }
        within(base + ".pan", place.pan, -1.0, 1.0, "");
        within(base + ".delay_us", place.delay_us, -max_abs_delay_us, max_abs_delay_us, " us");
        within(base + ".spread_db_per_s", place.spread_db_per_s, -max_abs_spread_db_per_s, max_abs_spread_db_per_s,
               " dB/s");
    }

    /// glide_cents and glide_s (core/glide.hpp): both or neither.
    void check_glide(const std::string& base, const partial& q) const {
        not_nan(base + ".glide_cents", q.glide_cents);
        not_nan(base + ".glide_s", q.glide_s);
        if (q.glide_cents == 0.0 && q.glide_s == 0.0) return;
        if (q.glide_cents == 0.0) {
            fail(base + ".glide_s", "needs glide_cents (the offset the glide starts at); without it there is no glide");
        }
        within(base + ".glide_cents", q.glide_cents, -max_abs_glide_cents, max_abs_glide_cents, " cents");
        if (q.glide_s == 0.0) fail(base + ".glide_cents", "needs glide_s (the glide's time constant, > 0)");
        within(base + ".glide_s", q.glide_s, 0.0, max_glide_s, " s", true);
    }

    void check(const patch& p) const {
        const note_info& n = p.note;
        text("note.name", n.name);
        within("note.f0_hz", n.f0_hz, 0.0, max_freq_hz, " Hz");
        within("note.length_s", n.length_s, 0.0, max_length_s, " s", true);
        within("note.inharmonicity_b", n.inharmonicity_b, 0.0, max_inharmonicity_b, "");
        within("note.gain_db", n.gain_db, min_level_db, max_peak_db, " dB");
        if (n.channels != 1 && n.channels != 2) {
            fail("note.channels", "must be 1 (mono) or 2 (stereo: left, right), not " + std::to_string(n.channels));
        }
        const bool stereo = is_stereo(p);
        if (n.root.method != root_method::unstated && n.root.method != root_method::unpitched) {
            within("note.tuning_cents", n.root.tuning_cents, -max_tuning_cents, max_tuning_cents, " cents");
            within("note.a4_hz", n.root.a4_hz, min_a4_hz, max_a4_hz, " Hz");
        }

        text("source.file", p.source.file);
        within("source.sample_rate_hz", p.source.sample_rate_hz, 0.0, max_sample_rate_hz, " Hz");
        within("source.onset_s", p.source.onset_s, 0.0, max_onset_s, " s");
        if (p.source.cut_s) within("source.cut_s", *p.source.cut_s, 0.0, max_onset_s, " s", true);
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
            check_place(base, q.place, stereo);
            check_glide(base, q);
        }
        for (std::size_t i = 0; i < p.noise.size(); ++i) {
            const noise_band& b = p.noise[i];
            const std::string base = indexed("noise", i);
            within(base + ".low_hz", b.low_hz, 0.0, max_freq_hz, " Hz");
            finite(base + ".high_hz", b.high_hz);
            if (!(b.high_hz > b.low_hz)) {
                fail(base + ".high_hz", in_parens(show(b.high_hz)) + " must be above low_hz (" + show(b.low_hz) + ")");
            }
            within(base + ".high_hz", b.high_hz, 0.0, max_freq_hz, " Hz");
            check_envelope(base, b.env);
            check_place(base, b.place, stereo);
            if (b.place.delay_us != 0.0) fail(base + ".delay_us", "is not a key of a noise band (noise has no phase to delay)");
            if (!stereo && b.coherence != 1.0) {
                fail(base + ".coherence", "is a stereo key; this patch is mono (stereo patches have channels = 2 in [note])");
            }
            if (stereo) within(base + ".coherence", b.coherence, 0.0, 1.0, "");
        }
    }
};

}  // namespace

void validate(const patch& p, const fail_fn& fail) { validator{fail}.check(p); }

std::optional<std::string> first_broken_rule(const patch& p) {
    struct broken {
        std::string message;
    };
    patch copy = p;
    canonicalize(copy);
    try {
        validate_and_round(copy, [](const std::string& path, const std::string& what) {
            const std::string shown = display(path);
            throw broken{shown.empty() ? what : shown + " " + what};
        });
    } catch (const broken& b) {
        return b.message;
    }
    return std::nullopt;
}

void validate_and_round(patch& p, const fail_fn& fail) {
    validator{fail}.check(p);
    patch_numbers::round_to_file_precision(p);
    validator{[&fail](const std::string& path, const std::string& what) {
        fail(path, what + " once rounded to the precision the file keeps");
    }}.check(p);
}

}  // namespace wane::patch_rules

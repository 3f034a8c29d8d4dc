// The patch reader (see patch_reader.hpp).
#include "io/patch_reader.hpp"

#include <algorithm>
#include <climits>
#include <cmath>
#include <cstdint>
#include <map>
#include <optional>
#include <span>
#include <string>

#include "core/patch_rules.hpp"
#include "core/pitch_names.hpp"
#include "io/errors.hpp"
#include "io/patch_keys.hpp"

namespace wane {

namespace {

using namespace patch_rules;
using namespace patch_keys;

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
        p.note.channels = get_int(note, "channels", "note.channels").value_or(1);
        if (p.note.channels == 2 && file_version_ < stereo_patch_format_version) {
            fail("note.channels", "= 2 (stereo) needs version = " + std::to_string(stereo_patch_format_version) +
                                      " (this file says version = " + std::to_string(file_version_) + ")");
        }
        read_root(note, p.note);
        warn_unknown(note, "note", note_keys);

        if (const toml::table* src = optional_table(root, "source", "source")) {
            p.source.file = get_string(*src, "file", "source.file").value_or("");
            p.source.sample_rate_hz = get_number(*src, "sample_rate_hz", "source.sample_rate_hz").value_or(0.0);
            p.source.onset_s = get_number(*src, "onset_s", "source.onset_s").value_or(0.0);
            p.source.cut_s = get_number(*src, "cut_s", "source.cut_s");
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
            q.place = read_place(t, base);
            q.place.delay_us = get_number(t, "delay_us", base + ".delay_us").value_or(0.0);
            read_glide(t, base, q);
            warn_unknown(t, base, partial_keys);
            p.partials.push_back(std::move(q));
        });
        for_each_table(root, "noise", max_noise_bands, [&](const toml::table& t, const std::string& base) {
            expect_keys(t, noise_keys);
            noise_band b;
            b.low_hz = required_number(t, "low_hz", base + ".low_hz");
            b.high_hz = required_number(t, "high_hz", base + ".high_hz");
            b.env = read_envelope(t, base);
            b.place = read_place(t, base);
            b.coherence = get_number(t, "coherence", base + ".coherence").value_or(1.0);
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
    std::int64_t file_version_ = patch_format_version;

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
        file_version_ = version;
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

    /// glide_cents and glide_s (version 4); the format's rules (patch_rules) check their values.
    void read_glide(const toml::table& t, const std::string& base, partial& q) {
        const auto cents = get_number(t, "glide_cents", base + ".glide_cents");
        const auto time_s = get_number(t, "glide_s", base + ".glide_s");
        if ((cents || time_s) && file_version_ < glide_patch_format_version) {
            fail(base + (cents ? ".glide_cents" : ".glide_s"),
                 "needs version = " + std::to_string(glide_patch_format_version) + " (this file says version = " +
                     std::to_string(file_version_) + ")");
        }
        q.glide_cents = cents.value_or(0.0);
        q.glide_s = time_s.value_or(0.0);
    }

    /// pan and spread_db_per_s (a partial's delay_us is read by the caller: noise has none).
    stereo_place read_place(const toml::table& t, const std::string& base) {
        stereo_place place;
        place.pan = get_number(t, "pan", base + ".pan").value_or(0.0);
        place.spread_db_per_s = get_number(t, "spread_db_per_s", base + ".spread_db_per_s").value_or(0.0);
        return place;
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

}  // namespace

patch_read_result read_patch_tree(const toml::table& root, std::string_view source_name) {
    reader r(source_name);
    return r.read(root);
}

}  // namespace wane

#include "transform/keymap.hpp"

#include <algorithm>
#include <cassert>

#include "core/rng.hpp"

namespace wane {

namespace {
constexpr std::string_view range_separator = "..";

std::string trim(std::string_view s) {
    const auto first = s.find_first_not_of(" \t");
    if (first == std::string_view::npos) return {};
    const auto last = s.find_last_not_of(" \t");
    return std::string(s.substr(first, last - first + 1));
}

int parse_range_end(const std::string& text, const char* which, std::string_view whole) {
    if (text.empty()) {
        throw transform_error("notes", "the " + std::string(which) + " end of the note range '" + std::string(whole) +
                                           "' is missing (expected LOW..HIGH, e.g. C2..C6)");
    }
    const auto midi = parse_note(text);
    if (!midi) {
        throw transform_error("notes", "unknown note name '" + text + "' in the note range '" + std::string(whole) +
                                           "' (expected a name like C4, F#3, Bb2 or a MIDI number 0..127)");
    }
    return *midi;
}
}  // namespace

note_range parse_note_range(std::string_view text) {
    const auto sep = text.find(range_separator);
    if (sep == std::string_view::npos) {
        throw transform_error("notes", "the note range '" + std::string(text) +
                                           "' has no '..' (expected LOW..HIGH, e.g. C2..C6)");
    }
    note_range r;
    r.low_midi = parse_range_end(trim(text.substr(0, sep)), "low", text);
    r.high_midi = parse_range_end(trim(text.substr(sep + range_separator.size())), "high", text);
    if (r.high_midi < r.low_midi) {
        throw transform_error("notes", "the note range '" + std::string(text) + "' is reversed (" +
                                           note_name(r.low_midi) + " is above " + note_name(r.high_midi) + ")");
    }
    return r;
}

std::string keymap_sample_name(int midi, int layer, int variant) {
    std::string note = note_name(midi);
    for (char& c : note) {
        if (c == '#') c = 's';  // '#' starts SFZ preprocessor lines; keep names plain
    }
    return note + "_v" + std::to_string(layer) + "_rr" + std::to_string(variant) + ".wav";
}

std::vector<keymap_job> plan_keymap(const keymap_params& params) {
    const note_range r = params.notes;
    assert(r.low_midi <= r.high_midi && params.every >= 1);
    assert(params.layers >= 1 && params.layers <= max_keymap_layers && params.variants >= 1);

    std::vector<int> roots;
    for (int m = r.low_midi; m <= r.high_midi; m += params.every) roots.push_back(m);
    if (roots.back() != r.high_midi) roots.push_back(r.high_midi);
    for (const int key : params.recorded_keys) {
        if (key >= r.low_midi && key <= r.high_midi) roots.push_back(key);
    }
    std::sort(roots.begin(), roots.end());
    roots.erase(std::unique(roots.begin(), roots.end()), roots.end());

    struct key_span {
        int root, lokey, hikey;
    };
    std::vector<key_span> spans;
    for (std::size_t i = 0; i < roots.size(); ++i) {
        const int lokey = i == 0 ? r.low_midi : spans.back().hikey + 1;
        // Keys up to the midpoint (rounded down) belong to this root.
        const int hikey = i + 1 == roots.size() ? r.high_midi : (roots[i] + roots[i + 1]) / 2;
        spans.push_back({roots[i], lokey, hikey});
    }

    std::vector<keymap_job> jobs;
    const int layers = params.layers;
    for (int variant = 1; variant <= params.variants; ++variant) {
        for (const key_span& s : spans) {
            for (int layer = 1; layer <= layers; ++layer) {
                const int steps_below_top = layers - layer;
                jobs.push_back({
                    .sample = keymap_sample_name(s.root, layer, variant),
                    .root_midi = s.root,
                    .lokey = s.lokey,
                    .hikey = s.hikey,
                    .layer = layer,
                    .lovel = 1 + midi_velocity_max * (layer - 1) / layers,
                    .hivel = midi_velocity_max * layer / layers,
                    .variant = variant,
                    .layer_gain_db = -params.layer_step_db * steps_below_top,
                    .layer_brightness_db_per_oct = -params.layer_brightness_step_db_per_oct * steps_below_top,
                    .seed = derive_seed(params.seed, static_cast<std::uint64_t>(s.root), static_cast<std::uint64_t>(variant)),
                });
            }
        }
    }
    return jobs;
}

transform_params keymap_job_transform(const transform_params& base, const keymap_job& job) {
    transform_params t = base;
    t.transpose_semitones = 0.0;
    t.to_midi = job.root_midi;
    t.brightness_db_per_oct += job.layer_brightness_db_per_oct;
    t.gain_db += job.layer_gain_db;
    t.variation.seed = job.seed;
    return t;
}

}  // namespace wane

#include "core/patch.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <utility>

namespace wane {

namespace {
constexpr std::array<std::pair<root_method, std::string_view>, 7> root_method_names{{
    {root_method::unstated, "unstated"},
    {root_method::harmonic_series, "harmonic-series"},
    {root_method::lowest_mode, "lowest-mode"},
    {root_method::strike_note, "strike-note"},
    {root_method::f0_hint, "f0-hint"},
    {root_method::by_hand, "by-hand"},
    {root_method::unpitched, "unpitched"},
}};
constexpr double cents_per_semitone = 100.0;
}  // namespace

std::string_view root_method_name(root_method m) {
    for (const auto& [value, name] : root_method_names)
        if (value == m) return name;
    return "unstated";
}

std::optional<root_method> parse_root_method(std::string_view name) {
    for (const auto& [value, text] : root_method_names)
        if (text == name) return value;
    return std::nullopt;
}

double root_hz(const note_info& n) {
    switch (n.root.method) {
    case root_method::unstated: return n.f0_hz;
    case root_method::unpitched: return 0.0;
    default: return midi_to_hz(n.root.midi + n.root.tuning_cents / cents_per_semitone, n.root.a4_hz);
    }
}

void set_root_hz(note_info& n, double freq_hz) {
    assert(freq_hz > 0.0);
    if (n.root.method == root_method::unstated || n.root.method == root_method::unpitched) return;
    const double midi = hz_to_midi(freq_hz, n.root.a4_hz);
    n.root.midi = static_cast<int>(std::round(midi));
    n.root.tuning_cents = (midi - n.root.midi) * cents_per_semitone;
}

bool has_glide(const patch& p) {
    return std::any_of(p.partials.begin(), p.partials.end(), [](const partial& q) { return q.glide_cents != 0.0; });
}

void canonicalize(patch& p) {
    std::stable_sort(p.partials.begin(), p.partials.end(),
                     [](const partial& a, const partial& b) { return a.freq_hz < b.freq_hz; });
    std::stable_sort(p.noise.begin(), p.noise.end(), [](const noise_band& a, const noise_band& b) {
        return a.low_hz != b.low_hz ? a.low_hz < b.low_hz : a.high_hz < b.high_hz;
    });
}

}  // namespace wane

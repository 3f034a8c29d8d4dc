// Hints for unknown keys in a patch (see patch_keys.hpp).
#include "io/patch_keys.hpp"

#include <algorithm>
#include <cstdint>
#include <vector>

namespace wane::patch_keys {

namespace {

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

}  // namespace

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

}  // namespace wane::patch_keys

// The patch format's keys, table by table, and the hints for a key that is not one of them
// (nearest known key by edit distance; the table a misplaced key belongs to).
#pragma once

#include <span>
#include <string>
#include <string_view>

namespace wane::patch_keys {

inline constexpr std::string_view top_keys[] = {"format", "version", "note", "source", "partial", "noise"};
inline constexpr std::string_view note_keys[] = {"name", "f0_hz", "length_s", "inharmonicity_b", "gain_db",
                                                 "root", "tuning_cents", "a4_hz", "root_found_by", "channels"};
inline constexpr std::string_view source_keys[] = {"file", "sample_rate_hz", "onset_s", "cut_s", "analysis"};
inline constexpr std::string_view analysis_keys[] = {"window", "fft_size", "window_s", "hop_s"};
inline constexpr std::string_view partial_keys[] = {"freq_hz", "harmonic", "phase_rad", "attack_s", "peak_db", "decay",
                                                    "pan", "delay_us", "spread_db_per_s", "glide_cents", "glide_s"};
inline constexpr std::string_view noise_keys[] = {"low_hz", "high_hz", "attack_s", "peak_db", "decay",
                                                  "pan", "spread_db_per_s", "coherence"};
inline constexpr std::string_view segment_keys[] = {"t60_s", "until_s"};

/// Whether `typed` is plausibly a misspelling of `known`: the unit suffix left out ("t60" for
/// "t60_s", "phase" for "phase_rad"), or at most about a third of the characters edited (1..3).
bool looks_like(std::string_view typed, std::string_view known);
/// "unknown key 'lenght_s' (did you mean 'length_s'?)", or the list of known keys.
std::string unknown_key_text(std::string_view key, std::span<const std::string_view> known);
/// The table a known key belongs to, for a key written in the wrong table (nullptr if none).
const char* home_of(std::string_view key);

}  // namespace wane::patch_keys

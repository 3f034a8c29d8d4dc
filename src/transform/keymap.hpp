// Planning a multisample set from one patch: which notes, velocity layers and round-robin
// variants to render, their file names, and the SFZ text that maps them onto the keyboard.
// Pure: the CLI (`wane keymap`) does the rendering and the writing.
//
// Keys: the notes low, low + every, low + 2 every, ... up to high are rendered, and high itself
// always is (so the top of the range is never stretched), and so is every recorded root's key in
// the range. Each rendered note's region covers the
// keys nearer to it than to its neighbours; a key exactly between two notes goes to the lower one
// (played by shifting that sample up). The first region starts at low, the last ends at high: the
// regions tile the range without gaps or overlaps.
// Velocity: layer j of L (1 = softest) covers lovel = 1 + floor(127 (j - 1) / L) to
// hivel = floor(127 j / L), tiling 1..127. The top layer is the patch as it is; each layer below it
// is layer_step_db quieter and layer_brightness_step_db_per_oct darker (a brightness tilt, see
// transform.hpp) than the one above.
// Round robin: variant r of V is one SFZ <group> with seq_length=V seq_position=r; each variant
// is the patch varied with its own seed (derived from the base seed, the note and r).
#pragma once

#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

#include "transform/transform.hpp"

namespace wane {

/// Defaults of the layer steps: our choice as a starting point (no source): 6 dB is half the
/// amplitude per layer, and 3 dB/octave darkens the upper partials of a soft layer audibly.
inline constexpr double default_layer_step_db = 6.0;
inline constexpr double default_layer_brightness_step_db_per_oct = 3.0;
inline constexpr int midi_velocity_max = 127;
inline constexpr int max_keymap_layers = midi_velocity_max;

struct note_range {
    int low_midi = 0;
    int high_midi = 0;
};

/// Parses "LOW..HIGH", each end a note name or MIDI number ("C2..C6", "36..84", "C4..C4").
/// Throws transform_error (param "notes") for a missing end, an unknown note name or a reversed range.
note_range parse_note_range(std::string_view text);

struct keymap_params {
    note_range notes{};
    int every = 1;     ///< render every N-th note (>= 1)
    int layers = 1;    ///< velocity layers, 1..127
    int variants = 1;  ///< round-robin variants (>= 1)
    double layer_step_db = default_layer_step_db;
    double layer_brightness_step_db_per_oct = default_layer_brightness_step_db_per_oct;
    std::uint64_t seed = 1;  ///< base seed of the variants
    /// Keys of recorded roots (keymap_roots.hpp): rendered too when inside the range, so every
    /// recording is played at its own key.
    std::vector<int> recorded_keys{};
};

struct keymap_job {
    std::string sample;  ///< file name, e.g. "C4_v2_rr1.wav" (sharps written 's': "Cs4")
    int root_midi = 0;   ///< the note rendered: pitch_keycenter
    int lokey = 0;
    int hikey = 0;
    int layer = 1;  ///< 1 = softest
    int lovel = 1;
    int hivel = midi_velocity_max;
    int variant = 1;  ///< 1..variants
    double layer_gain_db = 0.0;                ///< <= 0: level of this layer relative to the top one
    double layer_brightness_db_per_oct = 0.0;  ///< <= 0 for the default step
    std::uint64_t seed = 0;                    ///< variation seed of this render
};

/// File name of one render: note name (sharps as 's'), layer and variant: "Cs4_v2_rr1.wav".
std::string keymap_sample_name(int midi, int layer, int variant);

/// The render jobs, ordered by variant, then note, then layer (the order of the SFZ text).
std::vector<keymap_job> plan_keymap(const keymap_params& params);

/// The transforms of one job: base plus the move to the job's note, its layer's level and
/// brightness, and its variation seed.
transform_params keymap_job_transform(const transform_params& base, const keymap_job& job);

}  // namespace wane

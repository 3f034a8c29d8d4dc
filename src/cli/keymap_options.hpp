// The options of `wane keymap`, checked once at the edge (errors name the option, exit 2).
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "cli/length_options.hpp"
#include "cli/transform_options.hpp"
#include "io/audio_file.hpp"
#include "synthesis/render.hpp"
#include "synthesis/render_budget.hpp"
#include "transform/keymap.hpp"
#include "transform/keymap_roots.hpp"

namespace wane::cli {

/// Whole-set limits (our choice, no source): 1e12 partial-samples is about 3 minutes of one core
/// (5.8e9 per second, synthesis/render_budget.hpp); 10,000 files are 49 notes x 127 layers.
inline constexpr double default_max_set_work = 1e12;
inline constexpr int default_max_files = 10000;
inline constexpr int max_keymap_variants = 64;
/// Default length of every sample: until all of it has fallen this far below the note's peak
/// (our choice, no source: 80 dB under a sample that peaks near full scale lies below the noise
/// of a 16-bit file's dither and of most playback chains, so nothing audible is cut).
inline constexpr double default_keymap_until_db = -80.0;

struct keymap_options {
    std::vector<std::string> inputs;  ///< patch files or folders of patches
    std::string output_dir;
    std::optional<std::string> notes;  ///< not given: the recorded roots' span
    std::string between = "interpolated";
    int every = 1;
    int layers = 1;
    int variants = 1;
    double layer_step_db = default_layer_step_db;
    double layer_brightness_step = default_layer_brightness_step_db_per_oct;
    double rate_hz = default_output_rate_hz;
    std::string bits = "24";
    int threads = 0;
    length_cli length;
    double max_work = max_render_partial_samples;
    double max_set_work = default_max_set_work;
    int max_files = default_max_files;
    transform_cli transforms;
};

/// The options keymap checks before anything is read or written.
struct keymap_settings {
    transform_params base;
    std::optional<note_range> range;  ///< empty: the recorded roots' span
    between_roots mode = between_roots::interpolated;
    sample_format format = sample_format::pcm24;
    int threads = 1;
};

keymap_settings check_keymap_options(const keymap_options& o);

}  // namespace wane::cli

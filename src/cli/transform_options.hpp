// The sound-design options shared by `wane edit`, `wane render` and `wane keymap`: registration
// on a CLI11 subcommand, and the translation into wane::transform_params (validated here, at the
// edge, with errors naming the option).
#pragma once

#include <CLI/CLI.hpp>

#include <cstdint>
#include <optional>
#include <string>

#include "core/patch.hpp"
#include "transform/transform.hpp"

namespace wane::cli {

/// The options as typed; to_params checks and converts them.
struct transform_cli {
    std::optional<double> transpose_semitones{};
    std::string to_note;
    double a4_hz = default_a4_hz;
    bool decay_follows_pitch = false;
    double decay_pitch_exponent = rule_of_thumb_decay_exponent;
    double decay_scale = 1.0;
    double decay_tilt = 0.0;
    double brightness_db_per_oct = 0.0;
    std::optional<int> keep_strongest{};
    bool odd_only = false;
    bool even_only = false;
    std::optional<double> max_freq_hz{};
    std::optional<double> set_b{};
    std::optional<double> scale_b{};
    std::uint64_t seed = 1;
    double detune_cents = 0.0;
    double level_jitter_db = 0.0;
    double decay_jitter = 0.0;
    bool random_phase = false;
    double width = 1.0;
    std::optional<double> pan{};
};

/// Adds the options (in a "Sound design" help group) to sub, storing into opts.
void add_transform_options(CLI::App* sub, transform_cli& opts);

/// Checks the options and converts them. Throws usage_error naming the option: an unknown note
/// name, conflicting options (--transpose with --to-note, --odd-only with --even-only, --set-b
/// with --scale-b), a value out of range or not finite.
transform_params to_params(const transform_cli& opts);

/// The option that sets a transform_params field (e.g. "transpose_semitones" -> "--transpose").
std::string transform_option_name(const std::string& param);

/// apply_transforms, with a transform_error turned into a one-line error naming the option and
/// the patch file: "note.toml: --transpose: no partial is left below the Nyquist limit ...".
/// Partials the Nyquist limit, the ceiling, the parity or keep-strongest removed are reported on
/// stdout ("note.toml: 3 partials at or above the Nyquist frequency 24000 Hz (--rate) left out").
patch apply_transforms_checked(const patch& p, const transform_params& params, double sample_rate_hz,
                               const std::string& patch_name);

}  // namespace wane::cli

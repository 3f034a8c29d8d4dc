// How long `wane render` and `wane keymap` render: --length-s (a fixed length) or --until-db (until
// the sound has fallen that far below its peak, synthesis/render_length.hpp); without either, the
// patch's note.length_s. Checked once here, at the edge, with errors naming the option.
#pragma once

#include <CLI/CLI.hpp>

#include <optional>
#include <string>

#include "core/patch.hpp"

namespace wane::cli {

/// Quietest --until-db accepted, dB below the peak (a render's float output resolves ~ -150 dB).
inline constexpr double min_until_db = -200.0;

struct length_cli {
    std::optional<double> length_s;
    std::optional<double> until_db;
};

/// Adds --length-s and --until-db to sub.
void add_length_options(CLI::App* sub, length_cli& o);

/// Refuses bad values before anything is read (bad usage, exit 2, naming the option): --length-s
/// outside (0, max_length_s], --until-db outside [min_until_db, 0), both options at once.
void check_length_options(const length_cli& o);

/// The render length for p in seconds (the value for render_params::length_s): --length-s, or the
/// time p falls to --until-db (at least one 10 ms fade long), or 0 for the patch's own length.
/// Throws std::runtime_error naming patch_name when p holds a part above the --until-db level or
/// falls to it only after max_length_s.
double chosen_length_s(const patch& p, const length_cli& o, const std::string& patch_name);

}  // namespace wane::cli

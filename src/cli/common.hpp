// Shared CLI plumbing: subcommand registration, exit codes, messages.
// Exit codes: 0 success, 1 failure at run time, 2 bad usage.
#pragma once

#include <CLI/CLI.hpp>

#include <filesystem>
#include <functional>
#include <stdexcept>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

namespace wane {
struct patch;
struct mono_audio;
struct tracking_result;
}

namespace wane::cli {

inline constexpr int exit_ok = 0;
inline constexpr int exit_failure = 1;
inline constexpr int exit_usage = 2;

/// Thrown for bad usage found after parsing (exit 2), e.g. a malformed note name option.
struct usage_error : std::runtime_error {
    using std::runtime_error::runtime_error;
};

using run_fn = std::function<int()>;

/// Subcommands and what runs when each is chosen.
struct command_registry {
    std::vector<std::pair<CLI::App*, run_fn>> commands;
    void add(CLI::App* sub, run_fn run) { commands.emplace_back(sub, std::move(run)); }
};

/// Global flags, set by main before any command runs.
struct global_flags {
    bool quiet = false;
};
global_flags& globals();

/// "wane: warning: <msg>" on stderr (always shown: warnings are never silenced).
void warn(std::string_view msg);
/// The warnings of one reading: the first max_warnings_shown with warn(), then one line saying how
/// many more there were.
void warn_all(const std::vector<std::string>& warnings);
inline constexpr std::size_t max_warnings_shown = 10;
/// Text safe for a terminal: control characters (C0, DEL, and C1 as UTF-8) written as \xNN or
/// \u00NN, so a patch name cannot move the cursor or change colours.
std::string printable(std::string_view text);
/// "wane: error: <msg>" on stderr.
void print_error(std::string_view msg);
/// Informational line on stdout unless --quiet.
void say(std::string_view msg);

/// A number in short form for messages ("1e+308", "0.25", "48000"): at most 6 significant digits.
std::string short_num(double v);

/// The text `wane info` prints for a patch read from path (also embedded in reports).
std::string patch_info_text(const patch& p, const std::filesystem::path& path);

/// Default of report's --max-input-s and analyze's --max-report-s: the longest source a report draws.
double max_report_input_s();

/// Writes the HTML report of a source and its patch (tracking may be null: no overlay); the
/// spectrograms reach top_hz (0: the source's Nyquist frequency).
void write_analysis_report(const mono_audio& source, const std::filesystem::path& source_path, const patch& p,
                           const tracking_result* tracking, const std::filesystem::path& patch_path,
                           const std::filesystem::path& out_path, double top_hz = 0.0);

/// Each command file adds its subcommand (with options, help and examples footer) here.
void add_analyze_command(CLI::App& app, command_registry& reg);
void add_render_command(CLI::App& app, command_registry& reg);
void add_info_command(CLI::App& app, command_registry& reg);
void add_edit_command(CLI::App& app, command_registry& reg);
void add_blend_command(CLI::App& app, command_registry& reg);
void add_keymap_command(CLI::App& app, command_registry& reg);
void add_compare_command(CLI::App& app, command_registry& reg);
void add_report_command(CLI::App& app, command_registry& reg);

}  // namespace wane::cli

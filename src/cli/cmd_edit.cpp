// wane edit: apply sound-design edits to a patch and write the result as a new patch, so scripted
// and hand edits compose (edit, open the TOML, edit again).
#include <cmath>
#include <filesystem>
#include <optional>
#include <sstream>
#include <vector>

#include "cli/common.hpp"
#include "cli/transform_options.hpp"
#include "core/patch_rules.hpp"
#include "io/atomic_file.hpp"
#include "io/patch_checksum.hpp"
#include "io/patch_toml.hpp"
#include "core/pitch_names.hpp"
#include "synthesis/render.hpp"

namespace wane::cli {

namespace {

/// --tuning-cents range: a root is a note and at most a semitone off it.
constexpr double max_root_tuning_cents = 100.0;

struct edit_options {
    bool overwrite_edited = false;
    std::string input;
    std::string output;
    double rate_hz = default_output_rate_hz;
    transform_cli transforms;
    std::string root;                     ///< --root: a note name, a MIDI number, or "none"
    std::optional<double> tuning_cents{};  ///< --tuning-cents (needs --root)
};

/// Sets the root by hand (--root, --tuning-cents, A4 from --a4-hz); nothing else changes.
void set_root_by_hand(const edit_options& o, note_info& n) {
    if (o.tuning_cents && o.root.empty()) throw usage_error("--tuning-cents: needs --root (the note it tunes)");
    if (o.root.empty()) return;
    if (o.root == "none") {
        if (o.tuning_cents) throw usage_error("--tuning-cents: --root none has no tuning");
        n.root = {.method = root_method::unpitched};
        return;
    }
    const auto midi = parse_note(o.root);
    if (!midi) throw usage_error("--root: unknown note '" + o.root + "' (a name like C4, F#3, Bb2, a MIDI number 0-127, or none)");
    const double cents = o.tuning_cents.value_or(0.0);
    if (!std::isfinite(cents) || std::abs(cents) > max_root_tuning_cents)
        throw usage_error("--tuning-cents: must be within +-100 cents");
    n.root = {.midi = *midi, .tuning_cents = cents, .a4_hz = o.transforms.a4_hz, .method = root_method::by_hand};
}

int run_edit(const edit_options& o) {
    const transform_params params = to_params(o.transforms);
    if (!std::isfinite(o.rate_hz) || o.rate_hz < 0.0) throw usage_error("--rate: must be 0 or a positive rate in Hz");
    const std::filesystem::path in{o.input};
    const std::filesystem::path out{o.output};
    const std::vector<std::filesystem::path> inputs{in};
    refuse_overwriting_input(out, inputs);
    refuse_overwriting_edited_patch(out, o.overwrite_edited, "--overwrite-edited");

    const patch_read_result read = read_patch_file(in);
    warn_all(read.warnings);
    patch edited = apply_transforms_checked(read.value, params, o.rate_hz, o.input);
    set_root_by_hand(o, edited.note);

    // Check the result against the format's rules before anything is written.
    if (const auto broken = patch_rules::first_broken_rule(edited)) {
        throw std::runtime_error(o.output + ": the edited patch would not be valid, nothing written: " + *broken);
    }
    write_patch_file(out, edited);

    std::ostringstream s;
    s.precision(6);
    s << "wrote " << o.output << ": " << edited.partials.size() << " partials (was " << read.value.partials.size()
      << "), f0 " << edited.note.f0_hz << " Hz, root " << root_hz(edited.note) << " Hz";
    say(s.str());
    return exit_ok;
}

}  // namespace

void add_edit_command(CLI::App& app, command_registry& reg) {
    auto opts = std::make_shared<edit_options>();
    CLI::App* sub = app.add_subcommand("edit", "Apply sound-design edits to a patch and write a new patch");
    sub->add_option("patch", opts->input, "Patch to edit (TOML)")->required();
    sub->add_option("-o,--output", opts->output, "The edited patch (TOML); must differ from the input")->required();
    sub->add_flag("--overwrite-edited", opts->overwrite_edited,
                  "Replace an existing patch even if it was edited since wane wrote it (or not written by wane)");
    sub->add_option("--rate", opts->rate_hz,
                    "Sample rate the patch is meant for, Hz: partials at or above its Nyquist are dropped (0 keeps all)")
        ->capture_default_str();
    add_transform_options(sub, opts->transforms);
    sub->add_option("--root", opts->root,
                    "Set the root note by hand (C4, F#3, a MIDI number, or none for unpitched); partials unchanged; "
                    "applied after the other edits, equal temperament with --a4-hz")
        ->group("Root");
    sub->add_option("--tuning-cents", opts->tuning_cents, "Tuning of --root in cents from equal temperament (default 0)")
        ->group("Root");
    sub->footer("Examples:\n  wane edit pluck.toml -o fifth-up.toml --transpose 7 --decay-follows-pitch\n"
                "  wane edit pluck.toml -o dark.toml --brightness-db-oct -3 --decay-scale 2\n"
                "  wane edit bell.toml -o bell-a.toml --root A3 --tuning-cents -12.5");
    reg.add(sub, [opts] { return run_edit(*opts); });
}

}  // namespace wane::cli

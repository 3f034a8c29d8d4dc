// wane edit: apply sound-design edits to a patch and write the result as a new patch, so scripted
// and hand edits compose (edit, open the TOML, edit again).
#include <filesystem>
#include <sstream>
#include <vector>

#include "cli/common.hpp"
#include "cli/transform_options.hpp"
#include "core/patch_rules.hpp"
#include "io/atomic_file.hpp"
#include "io/patch_toml.hpp"

namespace wane::cli {

namespace {

constexpr double default_edit_rate_hz = 48000.0;

struct edit_options {
    std::string input;
    std::string output;
    double rate_hz = default_edit_rate_hz;
    transform_cli transforms;
};

int run_edit(const edit_options& o) {
    const transform_params params = to_params(o.transforms);
    if (!std::isfinite(o.rate_hz) || o.rate_hz < 0.0) throw usage_error("--rate: must be 0 or a positive rate in Hz");
    const std::filesystem::path in{o.input};
    const std::filesystem::path out{o.output};
    const std::vector<std::filesystem::path> inputs{in};
    refuse_overwriting_input(out, inputs);

    const patch_read_result read = read_patch_file(in);
    for (const std::string& w : read.warnings) warn(w);
    const patch edited = apply_transforms_checked(read.value, params, o.rate_hz, o.input);

    // Check the result against the format's rules before anything is written.
    if (const auto broken = patch_rules::first_broken_rule(edited)) {
        throw std::runtime_error(o.output + ": the edited patch would not be valid, nothing written: " + *broken);
    }
    write_patch_file(out, edited);

    std::ostringstream s;
    s.precision(6);
    s << "wrote " << o.output << ": " << edited.partials.size() << " partials (was " << read.value.partials.size()
      << "), f0 " << edited.note.f0_hz << " Hz";
    say(s.str());
    return exit_ok;
}

}  // namespace

void add_edit_command(CLI::App& app, command_registry& reg) {
    auto opts = std::make_shared<edit_options>();
    CLI::App* sub = app.add_subcommand("edit", "Apply sound-design edits to a patch and write a new patch");
    sub->add_option("patch", opts->input, "Patch to edit (TOML)")->required();
    sub->add_option("-o,--output", opts->output, "The edited patch (TOML); must differ from the input")->required();
    sub->add_option("--rate", opts->rate_hz,
                    "Sample rate the patch is meant for, Hz: partials at or above its Nyquist are dropped (0 keeps all)")
        ->capture_default_str();
    add_transform_options(sub, opts->transforms);
    sub->footer("Examples:\n  wane edit pluck.toml -o fifth-up.toml --transpose 7 --decay-follows-pitch\n"
                "  wane edit pluck.toml -o dark.toml --brightness-db-oct -3 --decay-scale 2");
    reg.add(sub, [opts] { return run_edit(*opts); });
}

}  // namespace wane::cli

// wane blend: interpolate two patches into a third (see transform/blend.hpp for the matching).
#include <cmath>
#include <filesystem>
#include <sstream>
#include <vector>

#include "cli/common.hpp"
#include "core/patch_rules.hpp"
#include "io/atomic_file.hpp"
#include "io/patch_checksum.hpp"
#include "io/patch_toml.hpp"
#include "transform/blend.hpp"
#include "transform/transform.hpp"

namespace wane::cli {

namespace {

struct blend_options {
    bool overwrite_edited = false;
    std::string input_a;
    std::string input_b;
    std::string output;
    double mix = 0.5;
    double tolerance_cents = default_blend_tolerance_cents;
};

int run_blend(const blend_options& o) {
    if (!std::isfinite(o.mix) || o.mix < 0.0 || o.mix > 1.0) throw usage_error("--mix: must be in [0, 1]");
    if (!std::isfinite(o.tolerance_cents) || o.tolerance_cents < 0.0) {
        throw usage_error("--tolerance-cents: must be a finite number >= 0");
    }
    const std::filesystem::path out{o.output};
    const std::vector<std::filesystem::path> inputs{o.input_a, o.input_b};
    refuse_overwriting_input(out, inputs);
    refuse_overwriting_edited_patch(out, o.overwrite_edited, "--overwrite-edited");

    const patch_read_result a = read_patch_file(o.input_a);
    warn_all(a.warnings);
    const patch_read_result b = read_patch_file(o.input_b);
    warn_all(b.warnings);

    patch blended;
    try {
        blended = blend(a.value, b.value, {.mix = o.mix, .match_tolerance_cents = o.tolerance_cents});
    } catch (const transform_error& e) {
        throw std::runtime_error(o.input_a + " and " + o.input_b + ": " + e.what());
    }
    if (blended.partials.size() > max_partials) {
        throw std::runtime_error(o.input_a + " and " + o.input_b + ": the blend has " +
                                 std::to_string(blended.partials.size()) + " partials, more than the format's " +
                                 std::to_string(max_partials) + "; thin the inputs first (wane edit --keep-strongest)");
    }
    if (const auto broken = patch_rules::first_broken_rule(blended)) {
        throw std::runtime_error(o.output + ": the blended patch would not be valid, nothing written: " + *broken);
    }
    write_patch_file(out, blended);

    std::ostringstream s;
    s << "wrote " << o.output << ": " << blended.partials.size() << " partials from " << a.value.partials.size()
      << " + " << b.value.partials.size() << ", mix " << o.mix;
    say(s.str());
    return exit_ok;
}

}  // namespace

void add_blend_command(CLI::App& app, command_registry& reg) {
    auto opts = std::make_shared<blend_options>();
    CLI::App* sub = app.add_subcommand("blend", "Blend two patches: shared partials interpolated, the others faded");
    sub->add_option("a", opts->input_a, "First patch (mix 0)")->required();
    sub->add_option("b", opts->input_b, "Second patch (mix 1)")->required();
    sub->add_option("-o,--output", opts->output, "The blended patch (TOML)")->required();
    sub->add_flag("--overwrite-edited", opts->overwrite_edited,
                  "Replace an existing patch even if it was edited since wane wrote it (or not written by wane)");
    sub->add_option("--mix", opts->mix, "0 = only the first patch, 1 = only the second")->capture_default_str();
    sub->add_option("--tolerance-cents", opts->tolerance_cents,
                    "Partials off the harmonic series pair with the nearest one of the other patch within this")
        ->capture_default_str();
    sub->footer("Examples:\n  wane blend steel.toml nylon.toml --mix 0.3 -o mostly-steel.toml");
    reg.add(sub, [opts] { return run_blend(*opts); });
}

}  // namespace wane::cli

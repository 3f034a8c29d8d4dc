// wane keymap: render a multisample set from one patch (notes x velocity layers x round-robin
// variants) on all cores, and write an SFZ file that maps it onto the keyboard. The plan (which
// notes, file names, key and velocity ranges) is transform/keymap.hpp, the SFZ text
// transform/keymap_sfz.hpp, the options cli/keymap_options.hpp, rendering and writing
// cli/keymap_render.hpp; this file builds the jobs' patches and runs the steps.
#include <algorithm>
#include <chrono>
#include <cmath>
#include <filesystem>
#include <vector>

#include "cli/common.hpp"
#include "cli/keymap_options.hpp"
#include "cli/keymap_render.hpp"
#include "core/rng.hpp"
#include "core/text_format.hpp"
#include "io/atomic_file.hpp"
#include "io/errors.hpp"
#include "io/patch_toml.hpp"
#include "synthesis/render_budget.hpp"
#include "synthesis/render_length.hpp"
#include "transform/keymap_sfz.hpp"

namespace wane::cli {

namespace {

/// Mixed into a job's variation seed to seed its noise bands (any constant; "noise" in ASCII).
constexpr std::uint64_t noise_seed_salt = 0x6e6f697365;

/// Variation used for round-robin variants when none is given (our choice, no source: small
/// enough that the variants sound like the same instrument, large enough to avoid the
/// machine-gun effect of identical repeats).
constexpr double rr_default_detune_cents = 2.0;
constexpr double rr_default_level_jitter_db = 0.5;
constexpr double rr_default_decay_jitter = 0.05;

std::string fmt(double v, int precision = 3) {
    return std::fabs(v) < 1e9 ? printf_text("%.*f", precision, v) : short_num(v);
}

/// Refuses a set of more files than --max-files, or more work than --max-set-work in all, before
/// any patch is built: every job costs at most what the source patch does at the set's length
/// (moving it to a note keeps the envelopes and can only drop partials above Nyquist).
void check_set_size(const patch& source, double length_s, const std::vector<keymap_job>& jobs,
                    const keymap_options& o, const std::string& set_name) {
    if (jobs.size() > static_cast<std::size_t>(o.max_files)) {
        throw std::runtime_error(set_name + ": keymap refused: " + std::to_string(jobs.size()) +
                                 " WAV files (notes x " + std::to_string(o.layers) + " layers x " +
                                 std::to_string(o.variants) + " variants), more than the " +
                                 std::to_string(o.max_files) +
                                 " of --max-files; use fewer notes (--every), layers or variants");
    }
    const render_cost one = render_cost_of(source, o.rate_hz, length_s);
    const double set_work = one.partial_samples * static_cast<double>(jobs.size());
    if (set_work > o.max_set_work) {
        throw std::runtime_error(set_name + ": keymap refused: " + std::to_string(jobs.size()) + " renders x up to " +
                                 short_num(one.partial_samples) + " partial-samples = " + short_num(set_work) +
                                 " of work, over the set budget of " + short_num(o.max_set_work) +
                                 " (--max-set-work raises it); use fewer notes, layers or variants, or a lower --rate");
    }
}

/// The render length of one sample (render_params::length_s): --length-s or --until-db as given;
/// without either, until the sound has fallen default_keymap_until_db below its peak, so no sample
/// is cut while it still sounds; a patch that holds its level keeps its own length_s (held is set).
double keymap_length_s(const patch& p, const length_cli& given, const std::string& name, bool& held) {
    if (given.length_s || given.until_db) return chosen_length_s(p, given, name);
    const sound_length s = sound_length_s(p, default_keymap_until_db);
    if (!s.length_s) {
        held = true;
        return 0.0;
    }
    return std::min(max_length_s, *s.length_s + end_fade_s);
}

/// Every job's patch and render settings, before any output exists (a note that leaves no
/// partial below Nyquist stops here with its name).
/// Returns whether a patch holds its level (so its samples last its own length_s).
bool make_job_patches(const patch& source, const transform_params& base, const std::vector<keymap_job>& jobs,
                      const keymap_options& o, std::vector<patch>& patches, std::vector<render_params>& renders) {
    const std::string& input = o.inputs.front();
    patches.reserve(jobs.size());
    renders.reserve(jobs.size());
    bool held = false;
    for (const keymap_job& j : jobs) {
        try {
            patches.push_back(apply_transforms(source, keymap_job_transform(base, j), o.rate_hz));
        } catch (const transform_error& e) {
            const std::string option = e.param == "to_midi" ? "--notes" : transform_option_name(e.param);
            std::string message = input;
            message.append(": ").append(option).append(": note ").append(note_name(j.root_midi)).append(": ").append(e.what());
            throw std::runtime_error(message);
        }
        const double length_s = keymap_length_s(patches.back(), o.length, input + ": note " + note_name(j.root_midi), held);
        renders.push_back({.sample_rate_hz = o.rate_hz, .length_s = length_s,
                           .noise_seed = derive_seed(j.seed, noise_seed_salt)});
        check_render_budget(patches.back(), o.rate_hz, length_s, std::filesystem::path{input}, o.max_work);
    }
    return held;
}

/// Refuses a set whose names would overwrite an input or a folder.
void check_set_names(const std::filesystem::path& dir, const std::vector<std::filesystem::path>& inputs,
                     const std::vector<std::string>& names) {
    std::error_code ec;
    for (const std::string& name : names) {
        refuse_overwriting_input(dir / name, inputs);
        if (std::filesystem::is_directory(dir / name, ec)) {
            throw wane::io_error((dir / name).string() + ": is a folder; the set needs this name for a file");
        }
    }
}

/// Round-robin variants need a variation: without a variation option, the defaults (said).
void use_round_robin_defaults(transform_params& base) {
    if (varies(base.variation)) return;
    base.variation.detune_cents = rr_default_detune_cents;
    base.variation.level_jitter_db = rr_default_level_jitter_db;
    base.variation.decay_jitter = rr_default_decay_jitter;
    base.variation.random_phase = true;
    say("round-robin variants without a variation option: using --detune-cents " + fmt(rr_default_detune_cents, 1) +
        " --level-jitter-db " + fmt(rr_default_level_jitter_db, 1) + " --decay-jitter " +
        fmt(rr_default_decay_jitter, 2) + " --random-phase");
}

/// The playback opcodes of the set: the release is the longest sample (capped at the format's
/// range); amp_veltrack is fitted to the rendered layers, each layer's level the median over its
/// renders of the peak in dB, relative to the loudest layer.
sfz_playback set_playback(const std::vector<keymap_job>& jobs, const std::vector<patch>& patches,
                          const std::vector<render_params>& renders, const std::vector<double>& peaks, int layers) {
    double longest_s = 0.0;
    for (std::size_t i = 0; i < jobs.size(); ++i) {
        longest_s = std::max(longest_s, static_cast<double>(render_frames(patches[i], renders[i])) / renders[i].sample_rate_hz);
    }
    std::vector<layer_level> levels(static_cast<std::size_t>(layers));
    std::vector<std::vector<double>> peaks_db(levels.size());
    for (std::size_t i = 0; i < jobs.size(); ++i) {
        const auto l = static_cast<std::size_t>(jobs[i].layer - 1);
        levels[l].lovel = jobs[i].lovel;
        levels[l].hivel = jobs[i].hivel;
        peaks_db[l].push_back(to_level(amp_lin{std::max(peaks[i], 1e-30)}).db);
    }
    for (std::size_t l = 0; l < levels.size(); ++l) {
        std::vector<double>& v = peaks_db[l];
        std::nth_element(v.begin(), v.begin() + static_cast<std::ptrdiff_t>(v.size() / 2), v.end());
        levels[l].level_db = v[v.size() / 2];
    }
    const double top_db = levels.back().level_db;
    for (layer_level& l : levels) l.level_db -= top_db;
    return {.release_s = std::min(longest_s, sfz_max_release_s), .amp_veltrack_pct = fit_amp_veltrack_pct(levels)};
}

/// A folder this run created is removed again when the run fails (only when empty).
struct remove_new_folder {
    std::filesystem::path dir;
    bool armed = false;
    ~remove_new_folder() {
        std::error_code ignored;
        if (armed) std::filesystem::remove(dir, ignored);
    }
};

/// Creates the output folder; says whether it existed.
bool make_output_folder(const std::filesystem::path& dir) {
    std::error_code ec;
    const bool existed = std::filesystem::exists(dir, ec);
    std::filesystem::create_directories(dir, ec);
    if (ec || !std::filesystem::is_directory(dir)) {
        throw wane::io_error(dir.string() + ": cannot create the output folder" + (ec ? ": " + ec.message() : std::string()));
    }
    return existed;
}

/// Reads the source patch; it must be pitched.
patch read_source(const std::string& input) {
    const patch_read_result read = read_patch_file(std::filesystem::path{input});
    warn_all(read.warnings);
    if (!(root_hz(read.value.note) > 0.0)) {
        throw std::runtime_error(input + ": keymap needs a pitched patch (a [note] root, or note.f0_hz > 0) to move it to each note");
    }
    return read.value;
}

int run_keymap(const keymap_options& o) {
    const auto start = std::chrono::steady_clock::now();
    const keymap_settings k = check_keymap_options(o);
    if (o.inputs.size() != 1) throw usage_error("keymap takes one patch");
    const std::string& input = o.inputs.front();
    const std::filesystem::path in{input};
    const patch source = read_source(input);
    transform_params base = k.base;
    if (o.variants > 1) use_round_robin_defaults(base);

    const keymap_params plan_params{.notes = k.range, .every = o.every, .layers = o.layers, .variants = o.variants,
                                    .layer_step_db = o.layer_step_db,
                                    .layer_brightness_step_db_per_oct = o.layer_brightness_step,
                                    .seed = base.variation.seed};
    const std::vector<keymap_job> jobs = plan_keymap(plan_params);
    bool held = false;
    check_set_size(source, keymap_length_s(source, o.length, input, held), jobs, o, input);
    std::vector<patch> patches;
    std::vector<render_params> renders;
    held = make_job_patches(source, base, jobs, o, patches, renders);

    // The set is built in a staging folder inside the output folder and moved into place when
    // complete: a failure or an interrupt leaves the previous set (if any) untouched.
    const std::filesystem::path dir{o.output_dir};
    const std::filesystem::path sfz_path = dir / (in.stem().string() + ".sfz");
    std::vector<std::string> names;
    names.reserve(jobs.size() + 1);
    for (const keymap_job& j : jobs) names.push_back(j.sample);
    names.push_back(sfz_path.filename().string());  // moved last
    check_set_names(dir, {in}, names);
    remove_new_folder new_folder{.dir = dir, .armed = !make_output_folder(dir)};
    staging_folder stage(dir);

    progress_bar bar("keymap", 2 * jobs.size(), globals().quiet);
    const keymap_render_result rendered = render_set({.patches = patches, .renders = renders, .jobs = jobs,
                                                      .set_name = input, .rate_hz = o.rate_hz, .format = k.format,
                                                      .threads = k.threads},
                                                     stage.path(), dir, bar);
    bar.finish();
    std::string title = "wane keymap of " + in.filename().string();
    if (!source.note.name.empty()) title += " (" + source.note.name + ")";
    const sfz_playback playback = set_playback(jobs, patches, renders, rendered.peaks, o.layers);
    try {
        write_file_atomic(stage.path() / sfz_path.filename(), keymap_sfz(jobs, plan_params, title, playback));
    } catch (const std::exception& e) {
        throw wane::io_error(staged_message(e.what(), stage.path(), dir));
    }
    stage.move_into_target(names);
    new_folder.armed = false;

    if (held) {
        warn(input + ": the patch holds its level (a last t60_s = inf or rising): its samples last the patch's "
                     "length_s of " + fmt(source.note.length_s, 2) + " s; give --length-s for another length");
    }
    const double elapsed_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
    const std::size_t notes = jobs.size() / static_cast<std::size_t>(o.layers * o.variants);
    say("wrote " + std::to_string(jobs.size()) + " WAV files (" + std::to_string(notes) + " notes x " +
        std::to_string(o.layers) + " layers x " + std::to_string(o.variants) + " variants) and " + sfz_path.string() +
        "; loudest peak " + fmt(to_level(amp_lin{rendered.peak * rendered.gain}).db, 2) + " dBFS; amp_veltrack=" +
        std::to_string(playback.amp_veltrack_pct) + "; " + fmt(elapsed_s, 2) + " s on " + std::to_string(k.threads) +
        " threads");
    return exit_ok;
}

}  // namespace

void add_keymap_command(CLI::App& app, command_registry& reg) {
    auto opts = std::make_shared<keymap_options>();
    CLI::App* sub = app.add_subcommand(
        "keymap", "Render a multisample set (notes x velocity layers x round-robin variants) and its SFZ file; "
                  "without --length-s or --until-db every sample lasts until it has fallen 80 dB below its peak");
    sub->add_option("patch", opts->inputs, "Patch to render (TOML; must have a root note)")->required();
    sub->add_option("-o,--output", opts->output_dir, "Folder for the WAV files and the SFZ file (created if needed)")
        ->required();
    sub->add_option("--notes", opts->notes, "Key range LOW..HIGH, names or MIDI numbers, e.g. C2..C6")->required();
    sub->add_option("--every", opts->every,
                    "Render every N-th note (and the top one); each region covers the keys nearest it")
        ->capture_default_str();
    sub->add_option("--layers", opts->layers, "Velocity layers (1..127), each step softer and darker")
        ->capture_default_str();
    sub->add_option("--variants", opts->variants, "Round-robin variants per note and layer (1..64)")
        ->capture_default_str();
    sub->add_option("--layer-step-db", opts->layer_step_db, "Level difference between neighbouring layers, dB")
        ->capture_default_str();
    sub->add_option("--layer-tilt-db-oct", opts->layer_brightness_step,
                    "Brightness difference between neighbouring layers, dB per octave above f0 (softer = darker)")
        ->capture_default_str();
    sub->add_option("--rate", opts->rate_hz, "Sample rate of the WAV files, Hz")->capture_default_str();
    sub->add_option("--bits", opts->bits, "Sample format: 16, 24 or 32f")->capture_default_str();
    sub->add_option("--threads", opts->threads, "Render threads (0 = all cores)")->capture_default_str();
    add_length_options(sub, opts->length);
    sub->add_option("--max-work", opts->max_work,
                    "Refuse a note whose render costs more than this many partial-samples ((partials + 4 x noise "
                    "bands) x frames)")
        ->capture_default_str();
    sub->add_option("--max-set-work", opts->max_set_work, "Refuse a set whose renders cost more than this in all")
        ->capture_default_str();
    sub->add_option("--max-files", opts->max_files, "Refuse a set of more WAV files than this")->capture_default_str();
    add_transform_options(sub, opts->transforms);
    sub->footer("Examples:\n  wane keymap pluck.toml -o pluck-set --notes C2..C6 --every 3 --layers 3 --variants 2\n"
                "  wane keymap pluck.toml -o pluck-set --notes C2..C6 --every 3 --until-db -90");
    reg.add(sub, [opts] { return run_keymap(*opts); });
}

}  // namespace wane::cli

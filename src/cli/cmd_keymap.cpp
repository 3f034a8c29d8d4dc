// wane keymap: render a multisample set from one patch (notes x velocity layers x round-robin
// variants) on all cores, and write an SFZ file that maps it onto the keyboard. The plan (which
// notes, file names, key and velocity ranges) is transform/keymap.hpp, the SFZ text
// transform/keymap_sfz.hpp, the options cli/keymap_options.hpp, rendering and writing
// cli/keymap_render.hpp; this file builds the jobs' patches and runs the steps.
#include <algorithm>
#include <chrono>
#include <cmath>
#include <filesystem>
#include <span>
#include <sstream>
#include <utility>
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
#include "transform/keymap_roots.hpp"
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

/// The recordings of the set: every patch file given, and every *.toml of a folder given (in
/// name order).
struct keymap_sources {
    std::vector<std::filesystem::path> paths;
    std::vector<std::string> names;  ///< file names, for the plan
    std::vector<patch> patches;
};

keymap_sources read_sources(const std::vector<std::string>& inputs) {
    keymap_sources s;
    for (const std::string& input : inputs) {
        std::error_code ec;
        if (!std::filesystem::is_directory(input, ec)) {
            s.paths.emplace_back(input);
            continue;
        }
        std::vector<std::filesystem::path> found;
        for (const auto& e : std::filesystem::directory_iterator(input, ec)) {
            if (e.path().extension() == ".toml") found.push_back(e.path());
        }
        if (ec) throw wane::io_error(input + ": cannot list the folder: " + ec.message());
        if (found.empty()) throw wane::io_error(input + ": the folder holds no patch (*.toml)");
        std::sort(found.begin(), found.end());
        s.paths.insert(s.paths.end(), found.begin(), found.end());
    }
    for (const std::filesystem::path& path : s.paths) {
        const patch_read_result read = read_patch_file(path);
        warn_all(read.warnings);
        if (!(root_hz(read.value.note) > 0.0)) {
            throw std::runtime_error(path.string() + ": keymap needs a pitched patch (a [note] root, or note.f0_hz > 0) "
                                                     "to move it to each note");
        }
        s.patches.push_back(read.value);
        s.names.push_back(path.filename().string());
    }
    return s;
}

/// What make_job_patches builds: every job's patch, render settings and recipe.
struct keymap_job_set {
    std::vector<patch> patches;
    std::vector<render_params> renders;
    std::vector<job_recipe> recipes;
    bool held = false;  ///< a patch holds its level: its samples last its own length_s
};

/// Every job's patch and render settings, before any output exists (a note that leaves no
/// partial below Nyquist stops here with its name). The layer steps are applied per root by the
/// recipe (recipe_patch), so the job's own transform carries none.
keymap_job_set make_job_patches(const keymap_sources& src, std::span<const recorded_root> roots, between_roots mode,
                                const transform_params& base, const std::vector<keymap_job>& jobs,
                                const keymap_options& o) {
    keymap_job_set set;
    set.patches.reserve(jobs.size());
    set.renders.reserve(jobs.size());
    for (const keymap_job& j : jobs) {
        const job_recipe recipe = recipe_for(roots, j.root_midi, j.layer, o.layers, mode);
        const std::filesystem::path& source_path = src.paths[recipe.lower.loud];
        const std::string name = source_path.string() + ": note " + note_name(j.root_midi);
        keymap_job moved = j;
        moved.layer_gain_db = 0.0;
        moved.layer_brightness_db_per_oct = 0.0;
        try {
            const patch made = recipe_patch(src.patches, recipe, j, base.a4_hz);
            set.patches.push_back(apply_transforms(made, keymap_job_transform(base, moved), o.rate_hz));
        } catch (const transform_error& e) {
            const std::string option = e.param == "to_midi" ? "--notes" : transform_option_name(e.param);
            std::string message = source_path.string();
            message.append(": ").append(option).append(": note ").append(note_name(j.root_midi)).append(": ").append(e.what());
            throw std::runtime_error(message);
        }
        const double length_s = keymap_length_s(set.patches.back(), o.length, name, set.held);
        set.renders.push_back({.sample_rate_hz = o.rate_hz, .length_s = length_s,
                               .noise_seed = derive_seed(j.seed, noise_seed_salt)});
        check_render_budget(set.patches.back(), o.rate_hz, length_s, source_path, o.max_work);
        set.recipes.push_back(recipe);
    }
    return set;
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

/// The plan of the set: the jobs over the requested range (default: the recorded roots' span);
/// with several roots every recorded key is rendered too.
keymap_params set_plan_params(const keymap_settings& k, const keymap_options& o, std::span<const recorded_root> roots,
                              std::uint64_t seed) {
    keymap_params p{.notes = k.range.value_or(note_range{roots.front().key_midi, roots.back().key_midi}),
                    .every = o.every, .layers = o.layers, .variants = o.variants, .layer_step_db = o.layer_step_db,
                    .layer_brightness_step_db_per_oct = o.layer_brightness_step, .seed = seed};
    if (roots.size() > 1) {
        for (const recorded_root& r : roots) p.recorded_keys.push_back(r.key_midi);
    }
    return p;
}

/// The set's name: the patch's stem for one patch, else the output folder's name.
std::string set_stem(const keymap_sources& src, const std::filesystem::path& dir) {
    if (src.paths.size() == 1) return src.paths.front().stem().string();
    const std::string name = dir.lexically_normal().filename().string();
    return name.empty() || name == "." || name == ".." ? std::string("set") : name;
}

/// Writes the SFZ and the plan into the staging folder (errors told as the output folder's).
void write_set_texts(const staging_folder& stage, const std::filesystem::path& dir,
                     const std::vector<std::pair<std::string, std::string>>& files) {
    for (const auto& [name, text] : files) {
        try {
            write_file_atomic(stage.path() / name, text);
        } catch (const std::exception& e) {
            throw wane::io_error(staged_message(e.what(), stage.path(), dir));
        }
    }
}

/// Size of the set's files in MiB.
double set_mib(const std::filesystem::path& dir, const std::vector<std::string>& names) {
    constexpr double bytes_per_mib = 1024.0 * 1024.0;
    std::uintmax_t bytes = 0;
    for (const std::string& name : names) {
        std::error_code ec;
        const std::uintmax_t size = std::filesystem::file_size(dir / name, ec);
        if (!ec) bytes += size;
    }
    return static_cast<double>(bytes) / bytes_per_mib;
}

int run_keymap(const keymap_options& o) {
    const auto start = std::chrono::steady_clock::now();
    const keymap_settings k = check_keymap_options(o);
    const keymap_sources src = read_sources(o.inputs);
    const std::vector<recorded_root> roots = group_roots(src.patches);
    transform_params base = k.base;
    if (o.variants > 1) use_round_robin_defaults(base);
    const keymap_params plan_params = set_plan_params(k, o, roots, base.variation.seed);
    const std::vector<keymap_job> jobs = plan_keymap(plan_params);
    const std::filesystem::path dir{o.output_dir};
    const std::string stem = set_stem(src, dir);
    const std::string set_name = src.paths.size() == 1 ? src.paths.front().string() : o.output_dir;
    bool held = false;
    for (const patch& p : src.patches) check_set_size(p, keymap_length_s(p, o.length, set_name, held), jobs, o, set_name);
    const keymap_job_set set = make_job_patches(src, roots, k.mode, base, jobs, o);
    const std::string plan_text = keymap_plan_text(jobs, set.recipes, src.names, k.mode);

    // The set is built in a staging folder inside the output folder and moved into place when
    // complete: a failure or an interrupt leaves the previous set (if any) untouched.
    const std::string sfz_name = stem + ".sfz";
    const std::string plan_name = stem + ".plan.txt";
    std::vector<std::string> names;
    names.reserve(jobs.size() + 2);
    for (const keymap_job& j : jobs) names.push_back(j.sample);
    names.push_back(plan_name);
    names.push_back(sfz_name);  // moved last
    check_set_names(dir, src.paths, names);
    remove_new_folder new_folder{.dir = dir, .armed = !make_output_folder(dir)};
    staging_folder stage(dir);

    progress_bar bar("keymap", 2 * jobs.size(), globals().quiet);
    const keymap_render_result rendered = render_set({.patches = set.patches, .renders = set.renders, .jobs = jobs,
                                                      .set_name = set_name, .rate_hz = o.rate_hz, .format = k.format,
                                                      .threads = k.threads},
                                                     stage.path(), dir, bar);
    bar.finish();
    std::string title = "wane keymap of";
    for (const std::string& n : src.names) title += " " + n;
    const sfz_playback playback = set_playback(jobs, set.patches, set.renders, rendered.peaks, o.layers);
    write_set_texts(stage, dir, {{plan_name, plan_text}, {sfz_name, keymap_sfz(jobs, plan_params, title, playback)}});
    stage.move_into_target(names);
    new_folder.armed = false;

    std::istringstream plan_lines(plan_text);
    for (std::string line; std::getline(plan_lines, line);) say(line);
    if (held || set.held) {
        warn(set_name + ": a patch holds its level (a last t60_s = inf or rising): its samples last the patch's "
                        "length_s; give --length-s for another length");
    }
    const double elapsed_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
    const std::size_t notes = jobs.size() / static_cast<std::size_t>(o.layers * o.variants);
    say("wrote " + std::to_string(jobs.size()) + " WAV files of " + fmt(set_mib(dir, names), 1) + " MiB in all (" +
        std::to_string(notes) + " notes x " +
        std::to_string(o.layers) + " layers x " + std::to_string(o.variants) + " variants from " +
        std::to_string(src.patches.size()) + " patch(es) at " + std::to_string(roots.size()) + " key(s)), " +
        (dir / sfz_name).string() + " and " + (dir / plan_name).string() + "; loudest peak " +
        fmt(to_level(amp_lin{rendered.peak * rendered.gain}).db, 2) + " dBFS; amp_veltrack=" +
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
    sub->add_option("patches", opts->inputs,
                    "Patches (TOML, each with a root note) or folders of them: each a root at its own key; several "
                    "at one key are velocity layers, ordered by level")
        ->required();
    sub->add_option("-o,--output", opts->output_dir, "Folder for the WAV files and the SFZ file (created if needed)")
        ->required();
    sub->add_option("--notes", opts->notes,
                    "Key range LOW..HIGH, names or MIDI numbers, e.g. C2..C6 (default: lowest to highest root)");
    sub->add_option("--between", opts->between,
                    "Keys between recorded roots: nearest (the nearest root, moved) or interpolated (the two "
                    "neighbouring roots' partials, levels and decays interpolated)")
        ->capture_default_str();
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
                "  wane keymap pluck.toml -o pluck-set --notes C2..C6 --every 3 --until-db -90\n"
                "  wane keymap piano-d2.toml piano-d4.toml piano-d4-soft.toml -o piano --notes C2..C6 --layers 3\n"
                "  wane keymap patches/ -o set --between nearest");
    reg.add(sub, [opts] { return run_keymap(*opts); });
}

}  // namespace wane::cli

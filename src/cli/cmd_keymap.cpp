// wane keymap: render a multisample set from one patch (notes x velocity layers x round-robin
// variants) on all cores, and write an SFZ file that maps it onto the keyboard. The plan (which
// notes, file names, key and velocity ranges, the SFZ text) is transform/keymap.hpp; this file
// renders, levels and writes.
//
// Levels: all renders share one gain so the layers keep their relative levels. If the loudest
// render would exceed full scale, every render is scaled by the same gain so that it peaks at
// keymap_peak_target_db, and a warning says so with the peak found.
// Memory: the renders are kept in memory between measuring the peak and writing when they fit in
// keymap_memory_budget_bytes; otherwise each is rendered twice (once for the peak, once to write).
#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <exception>
#include <filesystem>
#include <mutex>
#include <sstream>
#include <thread>
#include <vector>

#include "cli/common.hpp"
#include "cli/length_options.hpp"
#include "core/text_format.hpp"
#include "cli/loudness.hpp"
#include "cli/transform_options.hpp"
#include "io/atomic_file.hpp"
#include "io/audio_file.hpp"
#include "io/errors.hpp"
#include "synthesis/render_budget.hpp"
#include "io/patch_toml.hpp"
#include "platform/progress.hpp"
#include "synthesis/render.hpp"
#include "transform/keymap.hpp"
#include "core/rng.hpp"

namespace wane::cli {

namespace {

constexpr double default_keymap_rate_hz = 48000.0;
/// Peak of the loudest render after a common gain was needed: 1 dB below full scale leaves room
/// for the reconstruction peaks between samples (common practice, no source).
constexpr double keymap_peak_target_db = -1.0;
constexpr std::size_t keymap_memory_budget_bytes = std::size_t{1} << 30;  // 1 GiB of float samples
constexpr int max_keymap_variants = 64;
/// Whole-set limits (our choice, no source): 1e12 partial-samples is about 3 minutes of one core
/// (5.8e9 per second, synthesis/render_budget.hpp); 10,000 files are 49 notes x 127 layers.
constexpr double default_max_set_work = 1e12;
constexpr int default_max_files = 10000;
/// How far the softest layer may lie below the loudest, and how much darker it may be (our
/// choice, no source: 96 dB is a 16-bit file's range; 48 dB per octave matches --brightness-db-oct).
constexpr double max_layer_span_db = 96.0;
constexpr double max_layer_tilt_span_db_per_oct = 48.0;
/// Threads of the write phase when the renders are kept in memory: writing is bound by the
/// latency of each file's fsync (atomic output), not by the CPU, so more writes in flight than
/// cores shorten the wall time (measured: see tools/bench_keymap.cpp).
constexpr int keymap_writer_threads = 8;
/// Mixed into a job's variation seed to seed its noise bands (any constant; "noise" in ASCII).
constexpr std::uint64_t noise_seed_salt = 0x6e6f697365;

/// Variation used for round-robin variants when none is given (our choice, no source: small
/// enough that the variants sound like the same instrument, large enough to avoid the
/// machine-gun effect of identical repeats).
constexpr double rr_default_detune_cents = 2.0;
constexpr double rr_default_level_jitter_db = 0.5;
constexpr double rr_default_decay_jitter = 0.05;

struct keymap_options {
    std::string input;
    std::string output_dir;
    std::string notes;
    int every = 1;
    int layers = 1;
    int variants = 1;
    double layer_step_db = default_layer_step_db;
    double layer_brightness_step = default_layer_brightness_step_db_per_oct;
    double rate_hz = default_keymap_rate_hz;
    std::string bits = "24";
    int threads = 0;
    length_cli length;
    double max_work = max_render_partial_samples;
    double max_set_work = default_max_set_work;
    int max_files = default_max_files;
    transform_cli transforms;
};

std::string fmt(double v, int precision = 3) {
    return std::fabs(v) < 1e9 ? printf_text("%.*f", precision, v) : short_num(v);
}

/// Runs work(i) for i in [0, count) on `threads` threads; the first exception stops the rest and
/// is rethrown here.
template <class Work>
void parallel_for(std::size_t count, int threads, Work work) {
    std::atomic<std::size_t> next{0};
    std::atomic<bool> failed{false};
    std::exception_ptr error;
    std::mutex error_mutex;
    auto worker = [&] {
        while (!failed.load()) {
            const std::size_t i = next.fetch_add(1);
            if (i >= count) return;
            try {
                work(i);
            } catch (...) {
                std::lock_guard lock(error_mutex);
                if (!error) error = std::current_exception();
                failed = true;
            }
        }
    };
    const std::size_t n = std::min<std::size_t>(static_cast<std::size_t>(std::max(threads, 1)), count);
    std::vector<std::thread> pool;
    for (std::size_t t = 1; t < n; ++t) pool.emplace_back(worker);
    worker();
    for (std::thread& t : pool) t.join();
    if (error) std::rethrow_exception(error);
}

/// A write error from the staging folder, told as the destination's: the staging path replaced
/// by the output folder, and what became of the folder.
std::string staged_message(std::string what, const std::filesystem::path& stage, const std::filesystem::path& dir) {
    const std::string from = stage.string();
    for (std::size_t at = what.find(from); at != std::string::npos; at = what.find(from, at)) {
        what.replace(at, from.size(), dir.string());
    }
    while (!what.empty() && (what.back() == '.' || what.back() == ' ')) what.pop_back();
    return what + "; nothing of the new set was written (" + dir.string() + " is as it was)";
}

/// The options keymap checks before anything is read or written.
struct keymap_settings {
    transform_params base;
    note_range range;
    sample_format format = sample_format::pcm24;
    int threads = 1;
};

keymap_settings check_keymap_options(const keymap_options& o) {
    keymap_settings k;
    if (o.transforms.transpose_semitones || !o.transforms.to_note.empty()) {
        throw usage_error(std::string(o.transforms.transpose_semitones ? "--transpose" : "--to-note") +
                          ": not available with keymap, which moves the patch to each note of --notes");
    }
    k.base = to_params(o.transforms);
    try {
        k.range = parse_note_range(o.notes);
    } catch (const transform_error& e) {
        throw usage_error(std::string("--notes: ") + e.what());
    }
    if (o.every < 1) throw usage_error("--every: must be at least 1");
    if (o.layers < 1 || o.layers > max_keymap_layers) throw usage_error("--layers: must be between 1 and 127");
    if (o.variants < 1 || o.variants > max_keymap_variants) throw usage_error("--variants: must be between 1 and 64");
    const double steps = o.layers - 1;
    if (!(o.layer_step_db >= 0.0 && o.layer_step_db * steps <= max_layer_span_db)) {
        throw usage_error("--layer-step-db " + short_num(o.layer_step_db) +
                          ": must be 0 or more, and the softest layer at most " + short_num(max_layer_span_db) +
                          " dB below the loudest (--layers " + std::to_string(o.layers) + ")");
    }
    if (!(std::fabs(o.layer_brightness_step) * steps <= max_layer_tilt_span_db_per_oct)) {
        throw usage_error("--layer-tilt-db-oct " + short_num(o.layer_brightness_step) +
                          ": the softest layer may differ from the loudest by at most " +
                          short_num(max_layer_tilt_span_db_per_oct) + " dB per octave (--layers " +
                          std::to_string(o.layers) + ")");
    }
    if (!(o.rate_hz >= min_render_rate_hz && o.rate_hz <= max_render_rate_hz) || o.rate_hz != std::round(o.rate_hz)) {
        throw usage_error("--rate " + short_num(o.rate_hz) + ": must be a whole number of Hz from 8000 to 192000");
    }
    const auto format = parse_sample_format(o.bits);
    if (!format) throw usage_error("--bits: must be 16, 24 or 32f, not '" + o.bits + "'");
    k.format = *format;
    if (o.threads < 0) throw usage_error("--threads: must be 0 (all cores) or more");
    check_length_options(o.length);
    if (!(o.max_work > 0.0 && std::isfinite(o.max_work))) throw usage_error("--max-work " + short_num(o.max_work) + ": must be positive");
    if (!(o.max_set_work > 0.0 && std::isfinite(o.max_set_work))) {
        throw usage_error("--max-set-work " + short_num(o.max_set_work) + ": must be positive");
    }
    if (o.max_files < 1) throw usage_error("--max-files " + std::to_string(o.max_files) + ": must be at least 1");
    k.threads = o.threads > 0 ? o.threads : static_cast<int>(std::max(1u, std::thread::hardware_concurrency()));
    return k;
}

/// Refuses a set of more files than --max-files, or more work than --max-set-work in all, before
/// any patch is built: every job costs at most what the source patch does (moving it to a note
/// keeps the length and can only drop partials above Nyquist).
void check_set_size(const patch& source, const std::vector<keymap_job>& jobs, const keymap_options& o) {
    if (jobs.size() > static_cast<std::size_t>(o.max_files)) {
        throw std::runtime_error(o.input + ": keymap refused: " + std::to_string(jobs.size()) + " WAV files (notes x " +
                                 std::to_string(o.layers) + " layers x " + std::to_string(o.variants) +
                                 " variants), more than the " + std::to_string(o.max_files) +
                                 " of --max-files; use fewer notes (--every), layers or variants");
    }
    const render_cost one = render_cost_of(source, o.rate_hz, 0.0);
    const double set_work = one.partial_samples * static_cast<double>(jobs.size());
    if (set_work > o.max_set_work) {
        throw std::runtime_error(o.input + ": keymap refused: " + std::to_string(jobs.size()) + " renders x up to " +
                                 short_num(one.partial_samples) + " partial-samples = " + short_num(set_work) +
                                 " of work, over the set budget of " + short_num(o.max_set_work) +
                                 " (--max-set-work raises it); use fewer notes, layers or variants, or a lower --rate");
    }
}

/// Every job's patch and render settings, before any output exists (a note that leaves no
/// partial below Nyquist stops here with its name).
void make_job_patches(const patch& source, const transform_params& base, const std::vector<keymap_job>& jobs,
                      const keymap_options& o, std::vector<patch>& patches, std::vector<render_params>& renders) {
    const std::filesystem::path in{o.input};
    patches.reserve(jobs.size());
    renders.reserve(jobs.size());
    for (const keymap_job& j : jobs) {
        try {
            patches.push_back(apply_transforms(source, keymap_job_transform(base, j), o.rate_hz));
        } catch (const transform_error& e) {
            const std::string option = e.param == "to_midi" ? "--notes" : transform_option_name(e.param);
            throw std::runtime_error(o.input + ": " + option + ": note " + note_name(j.root_midi) + ": " + e.what());
        }
        const double length_s = chosen_length_s(patches.back(), o.length, o.input + ": note " + note_name(j.root_midi));
        renders.push_back({.sample_rate_hz = o.rate_hz, .length_s = length_s,
                           .noise_seed = derive_seed(j.seed, noise_seed_salt)});
        check_render_budget(patches.back(), o.rate_hz, length_s, in, o.max_work);
    }
}

/// Refuses a set whose names would overwrite the input or a folder.
void check_set_names(const std::filesystem::path& dir, const std::filesystem::path& in,
                     const std::vector<std::string>& names) {
    const std::vector<std::filesystem::path> inputs{in};
    std::error_code ec;
    for (const std::string& name : names) {
        refuse_overwriting_input(dir / name, inputs);
        if (std::filesystem::is_directory(dir / name, ec)) {
            throw wane::io_error((dir / name).string() + ": is a folder; the set needs this name for a file");
        }
    }
}

/// The one common gain of the set: 1, or what brings the loudest render to keymap_peak_target_db
/// (said in a warning). Refuses a set too loud to scale. peak is set to the loudest peak.
double common_gain(const std::vector<double>& peaks, const std::vector<keymap_job>& jobs, const std::string& input,
                   double& peak) {
    std::size_t loudest = 0;
    for (std::size_t i = 1; i < peaks.size(); ++i) {
        if (!(peaks[i] <= peaks[loudest])) loudest = i;  // NaN counts as loudest
    }
    peak = peaks[loudest];
    refuse_too_loud(peak, input + ": " + jobs[loudest].sample);
    double gain = 1.0;
    if (peak > 1.0) {
        gain = to_amp(level_db{keymap_peak_target_db}).lin / peak;
        warn("the loudest render (" + jobs[loudest].sample + ") peaks at " + fmt(to_level(amp_lin{peak}).db, 2) +
             " dBFS: all " + std::to_string(jobs.size()) + " renders are scaled by one common gain of " +
             fmt(to_level(amp_lin{gain}).db, 2) + " dB (layers keep their levels) so it peaks at " +
             fmt(keymap_peak_target_db, 1) + " dBFS");
    }
    return gain;
}

/// Renders every job (keeping the renders when they fit keymap_memory_budget_bytes), levels the
/// set by one common gain and writes the WAVs into the staging folder. Returns the gain; peak is
/// set to the loudest render's peak.
double render_set(const std::vector<patch>& patches, const std::vector<render_params>& renders,
                  const std::vector<keymap_job>& jobs, const keymap_options& o, const keymap_settings& k,
                  const std::filesystem::path& stage_dir, const std::filesystem::path& dir, progress_bar& bar,
                  double& peak) {
    const int threads = k.threads;
    std::size_t total_frames = 0;
    for (std::size_t i = 0; i < jobs.size(); ++i) total_frames += render_frames(patches[i], renders[i]);
    const bool keep = total_frames <= keymap_memory_budget_bytes / sizeof(float);
    std::vector<std::vector<float>> kept(keep ? jobs.size() : 0);
    std::vector<double> peaks(jobs.size(), 0.0);
    parallel_for(jobs.size(), threads, [&](std::size_t i) {
        std::vector<float> x = render_patch(patches[i], renders[i]);
        peaks[i] = peak_abs(x);
        if (keep) kept[i] = std::move(x);
        bar.advance();
    });
    const double gain = common_gain(peaks, jobs, o.input, peak);
    const auto gain_f = static_cast<float>(gain);
    const int write_threads = keep ? std::max(threads, keymap_writer_threads) : threads;
    parallel_for(jobs.size(), write_threads, [&](std::size_t i) {
        std::vector<float> x = keep ? std::move(kept[i]) : render_patch(patches[i], renders[i]);
        if (gain != 1.0) {
            for (float& v : x) v *= gain_f;
        }
        try {
            write_audio(stage_dir / jobs[i].sample, x, o.rate_hz, {.format = k.format, .root_midi = jobs[i].root_midi});
        } catch (const std::exception& e) {
            throw wane::io_error(staged_message(e.what(), stage_dir, dir));
        }
        bar.advance();
    });
    return gain;
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

int run_keymap(const keymap_options& o) {
    const auto start = std::chrono::steady_clock::now();
    const keymap_settings k = check_keymap_options(o);
    transform_params base = k.base;
    const note_range& range = k.range;
    const int threads = k.threads;

    const std::filesystem::path in{o.input};
    const patch_read_result read = read_patch_file(in);
    warn_all(read.warnings);
    const patch& source = read.value;
    if (!(root_hz(source.note) > 0.0)) {
        throw std::runtime_error(o.input + ": keymap needs a pitched patch (a [note] root, or note.f0_hz > 0) to move it to each note");
    }
    if (o.variants > 1) use_round_robin_defaults(base);

    const keymap_params plan_params{.notes = range,
                                    .every = o.every,
                                    .layers = o.layers,
                                    .variants = o.variants,
                                    .layer_step_db = o.layer_step_db,
                                    .layer_brightness_step_db_per_oct = o.layer_brightness_step,
                                    .seed = base.variation.seed};
    const std::vector<keymap_job> jobs = plan_keymap(plan_params);
    check_set_size(source, jobs, o);

    std::vector<patch> patches;
    std::vector<render_params> renders;
    make_job_patches(source, base, jobs, o, patches, renders);

    // ---- The set is built in a staging folder inside the output folder and moved into place when
    // complete: a failure or an interrupt leaves the previous set (if any) untouched.
    const std::filesystem::path dir{o.output_dir};
    const std::filesystem::path sfz_path = dir / (in.stem().string() + ".sfz");
    std::vector<std::string> names;
    names.reserve(jobs.size() + 1);
    for (const keymap_job& j : jobs) names.push_back(j.sample);
    names.push_back(sfz_path.filename().string());  // moved last
    check_set_names(dir, in, names);
    std::error_code ec;
    const bool dir_existed = std::filesystem::exists(dir, ec);
    std::filesystem::create_directories(dir, ec);
    if (ec || !std::filesystem::is_directory(dir)) {
        throw wane::io_error(o.output_dir + ": cannot create the output folder" + (ec ? ": " + ec.message() : std::string()));
    }
    // A folder this run created is removed again when the run fails.
    struct remove_new_folder {
        std::filesystem::path dir;
        bool armed;
        ~remove_new_folder() {
            std::error_code ignored;
            if (armed) std::filesystem::remove(dir, ignored);  // only when empty
        }
    } new_folder{dir, !dir_existed};
    staging_folder stage(dir);

    // ---- Render (peaks), then level and write.
    progress_bar bar("keymap", 2 * jobs.size(), globals().quiet);
    double peak = 0.0;
    const double gain = render_set(patches, renders, jobs, o, k, stage.path(), dir, bar, peak);
    bar.finish();
    std::string title = "wane keymap of " + in.filename().string();
    if (!source.note.name.empty()) title += " (" + source.note.name + ")";
    try {
        write_file_atomic(stage.path() / sfz_path.filename(), keymap_sfz(jobs, plan_params, title));
    } catch (const std::exception& e) {
        throw wane::io_error(staged_message(e.what(), stage.path(), dir));
    }
    stage.move_into_target(names);
    new_folder.armed = false;

    const double elapsed_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
    const std::size_t notes = jobs.size() / static_cast<std::size_t>(o.layers * o.variants);
    say("wrote " + std::to_string(jobs.size()) + " WAV files (" + std::to_string(notes) + " notes x " +
        std::to_string(o.layers) + " layers x " + std::to_string(o.variants) + " variants) and " + sfz_path.string() +
        "; loudest peak " + fmt(to_level(amp_lin{peak * gain}).db, 2) + " dBFS; " + fmt(elapsed_s, 2) + " s on " +
        std::to_string(threads) + " threads");
    return exit_ok;
}

}  // namespace

void add_keymap_command(CLI::App& app, command_registry& reg) {
    auto opts = std::make_shared<keymap_options>();
    CLI::App* sub = app.add_subcommand(
        "keymap", "Render a multisample set (notes x velocity layers x round-robin variants) and its SFZ file");
    sub->add_option("patch", opts->input, "Patch to render (TOML; must have a root note)")->required();
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

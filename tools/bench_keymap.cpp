// Benchmark of `wane keymap` over several recorded notes: wall time of the whole command (read,
// plan, interpolate, render on all threads, level, write 24-bit WAV files, the plan and the SFZ)
// for a set of 3 roots (C2, C4, C6) x 3 velocity layers (3 recordings per root, 8 dB apart, the
// softer darker) x 2 round-robin variants over every key C1..C7 (73 keys, keys between roots
// interpolated), 4 s notes at 48 kHz. Each recording has 80 partials: 40 harmonics x 2 strings
// 1.5 cents apart (piano-like); moved up the keyboard, partials past Nyquist are left out, as in
// any real keymap. Prints the partial-samples the set renders (counted through the same core
// functions the command uses), the median wall time of the repeats and the CPU time (user +
// system) of the command per run.
//
//   bench_keymap WANE_EXE [--threads N] [--repeats N] [--keep DIR]
//
// The patches are written to a temporary folder (or DIR) together with the outputs.
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <filesystem>
#include <string>
#include <vector>

#include <sys/resource.h>

#include "core/patch.hpp"
#include "core/pitch_names.hpp"
#include "io/patch_toml.hpp"
#include "synthesis/render.hpp"
#include "transform/keymap.hpp"
#include "transform/keymap_roots.hpp"
#include "transform/transform.hpp"
#include "bench_args.hpp"

namespace {

constexpr double bench_rate_hz = 48000.0;
constexpr double bench_length_s = 4.0;
constexpr const char* bench_notes = "C1..C7";
constexpr int bench_root_keys[] = {36, 60, 84};  // C2, C4, C6
constexpr int bench_layers = 3;
constexpr int bench_variants = 2;
constexpr int bench_harmonics = 40;
constexpr int bench_strings = 2;  // 80 partials
constexpr double string_detune_cents = 1.5;
constexpr double layer_step_db = 8.0;
constexpr double layer_tilt_db_per_oct = 2.0;
/// The set's budget in the issue (under this many seconds on 2 cores).
constexpr double target_s = 10.0;

wane::patch recording(int key, int layer) {
    const double f0_hz = wane::midi_to_hz(key);
    const int below_top = bench_layers - layer;
    wane::patch p;
    p.note.name = "bench " + wane::note_name(key) + " layer " + std::to_string(layer);
    p.note.f0_hz = f0_hz;
    p.note.length_s = bench_length_s;
    p.source.file = "bench";
    p.source.sample_rate_hz = bench_rate_hz;
    for (int n = 1; n <= bench_harmonics; ++n) {
        for (int s = 0; s < bench_strings; ++s) {
            wane::partial q;
            q.freq_hz = n * f0_hz * std::exp2(string_detune_cents * s / 1200.0);
            q.harmonic = s == 0 ? n : 0;
            q.phase_rad = 0.37 * n + s;
            q.env.attack_s = 0.003;
            q.env.peak = wane::level_db{-20.0 - 20.0 * std::log10(n) - below_top * (layer_step_db + layer_tilt_db_per_oct * std::log2(n))};
            const double k = std::sqrt(static_cast<double>(n)) * std::exp2((key - 60) / 24.0);
            q.env.decay = {{.t60_s = 6.0 / k, .until_s = 0.4}, {.t60_s = 12.0 / k, .until_s = {}}};
            p.partials.push_back(q);
        }
    }
    wane::canonicalize(p);
    return p;
}

/// CPU seconds (user + system) used so far by finished child processes.
double children_cpu_s() {
    rusage u{};
    getrusage(RUSAGE_CHILDREN, &u);
    const auto sec = [](const timeval& t) { return static_cast<double>(t.tv_sec) + 1e-6 * static_cast<double>(t.tv_usec); };
    return sec(u.ru_utime) + sec(u.ru_stime);
}

/// Partial-samples the keymap renders (partials below Nyquist times frames, over all jobs), from
/// the same recipes and transforms the command uses (without the variation, which changes no count).
double partial_samples(const std::vector<wane::patch>& patches) {
    const auto roots = wane::group_roots(patches);
    wane::keymap_params params{.notes = wane::parse_note_range(bench_notes), .layers = bench_layers,
                               .variants = bench_variants};
    for (const auto& r : roots) params.recorded_keys.push_back(r.key_midi);
    double total = 0.0;
    for (wane::keymap_job j : wane::plan_keymap(params)) {
        const auto recipe = wane::recipe_for(roots, j.root_midi, j.layer, bench_layers, wane::between_roots::interpolated);
        const wane::patch made = wane::recipe_patch(patches, recipe, j, wane::default_a4_hz);
        j.layer_gain_db = 0.0;
        j.layer_brightness_db_per_oct = 0.0;
        const wane::patch t = wane::apply_transforms(made, wane::keymap_job_transform({}, j), bench_rate_hz);
        const auto s = wane::summarize_render(t, {.sample_rate_hz = bench_rate_hz, .length_s = bench_length_s});
        total += static_cast<double>(s.partials_rendered) * static_cast<double>(s.frames);
    }
    return total;
}

}  // namespace

int main(int argc, char** argv) {
    if (argc < 2) {
        std::fprintf(stderr, "usage: bench_keymap WANE_EXE [--threads N] [--repeats N] [--keep DIR]\n");
        return 2;
    }
    const std::string wane_exe = argv[1];
    int threads = 0;
    int repeats = 3;
    std::filesystem::path dir = std::filesystem::temp_directory_path() / "wane-bench-keymap";
    bool keep = false;
    for (int i = 2; i < argc; ++i) {
        if (std::strcmp(argv[i], "--threads") == 0 && i + 1 < argc) threads = wane::bench::int_option("bench_keymap", "--threads", argv[++i], 0);
        else if (std::strcmp(argv[i], "--repeats") == 0 && i + 1 < argc) repeats = wane::bench::int_option("bench_keymap", "--repeats", argv[++i], 1);
        else if (std::strcmp(argv[i], "--keep") == 0 && i + 1 < argc) {
            dir = argv[++i];
            keep = true;
        }
    }
    const std::filesystem::path patch_dir = dir / "recordings";
    std::filesystem::create_directories(patch_dir);
    std::vector<wane::patch> patches;
    for (const int key : bench_root_keys) {
        for (int layer = 1; layer <= bench_layers; ++layer) {
            patches.push_back(recording(key, layer));
            wane::write_patch_file(patch_dir / (wane::note_name(key) + "_v" + std::to_string(layer) + ".toml"), patches.back());
        }
    }
    std::printf("wane keymap of %zu recordings (3 roots x %d layers), %s every key, %d variants, %g s notes, "
                "%d partials, %g Hz, 24-bit, --threads %d\n",
                patches.size(), bench_layers, bench_notes, bench_variants, bench_length_s,
                bench_harmonics * bench_strings, bench_rate_hz, threads);
    const std::filesystem::path out = dir / "set";
    const std::string cmd = "'" + wane_exe + "' --quiet keymap '" + patch_dir.string() + "' -o '" + out.string() +
                            "' --notes " + bench_notes + " --layers " + std::to_string(bench_layers) + " --variants " +
                            std::to_string(bench_variants) + " --length-s " + std::to_string(bench_length_s) +
                            " --rate 48000 --bits 24 --threads " + std::to_string(threads);
    std::vector<double> times;
    const double cpu_before_s = children_cpu_s();
    for (int r = 0; r < repeats; ++r) {
        std::filesystem::remove_all(out);
        const auto t0 = std::chrono::steady_clock::now();
        const int rc = std::system(cmd.c_str());
        const auto t1 = std::chrono::steady_clock::now();
        if (rc != 0) {
            std::fprintf(stderr, "bench_keymap: '%s' failed (status %d)\n", cmd.c_str(), rc);
            return 1;
        }
        times.push_back(std::chrono::duration<double>(t1 - t0).count());
    }
    const double cpu_per_run_s = (children_cpu_s() - cpu_before_s) / repeats;
    std::sort(times.begin(), times.end());
    const double median_s = times[times.size() / 2];
    std::size_t wavs = 0;
    for (const auto& e : std::filesystem::directory_iterator(out)) wavs += e.path().extension() == ".wav";
    std::printf("%zu WAV files, %.3g partial-samples: median %.3f s wall (min %.3f, max %.3f), %.2f s CPU per run %s\n",
                wavs, partial_samples(patches), median_s, times.front(), times.back(), cpu_per_run_s,
                median_s < target_s ? "(under 10 s)" : "(NOT under 10 s)");
    if (!keep) std::filesystem::remove_all(dir);
    return median_s < target_s ? 0 : 1;
}

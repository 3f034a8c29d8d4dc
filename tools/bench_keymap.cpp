// Benchmark of `wane keymap`: wall time of the whole command (read, plan, render on all threads,
// level, write 24-bit WAV files and the SFZ) for 49 notes (C2..C6) x 3 velocity layers of a 4 s,
// 60-partial patch at 48 kHz. Two patches:
//   harmonic: 60 harmonics of C2 (65.41 Hz, up to 3.9 kHz); transposed up, the top harmonics pass
//             Nyquist and are left out (at C6 only 22 remain), as in any real keymap;
//   unison:   20 harmonics x 3 slightly detuned strings (piano-like), so all 60 partials stay
//             below Nyquist up to C6: every render has 60 partials (the worst case).
// Prints the partial-samples each set renders, the median wall time of the repeats and the CPU
// time (user + system) of the command per run.
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
#include "io/patch_toml.hpp"
#include "synthesis/render.hpp"
#include "transform/keymap.hpp"
#include "transform/transform.hpp"

namespace {

constexpr double bench_rate_hz = 48000.0;
constexpr double bench_length_s = 4.0;
constexpr double bench_f0_hz = 65.406391826;  // C2, equal temperament, A4 = 440 Hz
constexpr const char* bench_notes = "C2..C6";
constexpr int bench_layers = 3;
constexpr int bench_partials = 60;
constexpr int unison_strings = 3;
constexpr double unison_detune_cents = 1.5;

wane::partial make_partial(double freq_hz, int harmonic, double phase_rad, double peak_db) {
    wane::partial q;
    q.freq_hz = freq_hz;
    q.harmonic = harmonic;
    q.phase_rad = phase_rad;
    q.env.attack_s = 0.003;
    q.env.peak = wane::level_db{peak_db};
    q.env.decay = {{.t60_s = 6.0 / std::sqrt(static_cast<double>(harmonic)), .until_s = 0.4},
                   {.t60_s = 12.0 / std::sqrt(static_cast<double>(harmonic)), .until_s = {}}};
    return q;
}

wane::patch base_patch(const char* name) {
    wane::patch p;
    p.note.name = name;
    p.note.f0_hz = bench_f0_hz;
    p.note.length_s = bench_length_s;
    p.source.file = "bench";
    p.source.sample_rate_hz = bench_rate_hz;
    return p;
}

wane::patch harmonic_patch() {
    wane::patch p = base_patch("bench: 60 harmonics");
    for (int n = 1; n <= bench_partials; ++n) {
        p.partials.push_back(make_partial(n * bench_f0_hz, n, 0.37 * n, -16.0 - 20.0 * std::log10(n)));
    }
    wane::canonicalize(p);
    return p;
}

wane::patch unison_patch() {
    wane::patch p = base_patch("bench: 20 harmonics x 3 strings");
    for (int n = 1; n <= bench_partials / unison_strings; ++n) {
        for (int s = 0; s < unison_strings; ++s) {
            const double cents = unison_detune_cents * (s - 1);
            const double f = n * bench_f0_hz * std::exp2(cents / 1200.0);
            p.partials.push_back(make_partial(f, s == 1 ? n : 0, 0.37 * n + s, -20.0 - 20.0 * std::log10(n)));
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

/// Partial-samples the keymap renders (partials below Nyquist times frames, over all jobs).
double partial_samples(const wane::patch& p) {
    const wane::keymap_params params{.notes = wane::parse_note_range(bench_notes), .layers = bench_layers};
    double total = 0.0;
    for (const wane::keymap_job& j : wane::plan_keymap(params)) {
        const wane::patch t = wane::apply_transforms(p, wane::keymap_job_transform({}, j), bench_rate_hz);
        const auto s = wane::summarize_render(t, {.sample_rate_hz = bench_rate_hz});
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
        if (std::strcmp(argv[i], "--threads") == 0 && i + 1 < argc) threads = std::atoi(argv[++i]);
        else if (std::strcmp(argv[i], "--repeats") == 0 && i + 1 < argc) repeats = std::max(1, std::atoi(argv[++i]));
        else if (std::strcmp(argv[i], "--keep") == 0 && i + 1 < argc) {
            dir = argv[++i];
            keep = true;
        }
    }
    std::filesystem::create_directories(dir);
    std::printf("wane keymap %s x %d layers, %g s notes, %d partials, %g Hz, 24-bit, --threads %d\n", bench_notes,
                bench_layers, bench_length_s, bench_partials, bench_rate_hz, threads);
    int status = 0;
    for (const auto& [label, p] : {std::pair{"harmonic", harmonic_patch()}, std::pair{"unison", unison_patch()}}) {
        const std::filesystem::path patch_path = dir / (std::string(label) + ".toml");
        wane::write_patch_file(patch_path, p);
        const std::filesystem::path out = dir / (std::string(label) + "-set");
        const std::string cmd = "'" + wane_exe + "' --quiet keymap '" + patch_path.string() + "' -o '" + out.string() +
                                "' --notes " + bench_notes + " --layers " + std::to_string(bench_layers) +
                                " --length-s " + std::to_string(bench_length_s) + " --rate 48000 --bits 24 --threads " + std::to_string(threads);
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
        const double work = partial_samples(p);
        std::size_t wavs = 0;
        for (const auto& e : std::filesystem::directory_iterator(out)) wavs += e.path().extension() == ".wav";
        std::printf("%-9s %zu WAV files, %.3g partial-samples: median %.3f s wall (min %.3f, max %.3f), %.2f s CPU "
                    "per run %s\n",
                    label, wavs, work, median_s, times.front(), times.back(), cpu_per_run_s,
                    median_s < 3.0 ? "(under 3 s)" : "(NOT under 3 s)");
        if (median_s >= 3.0) status = 1;
    }
    if (!keep) std::filesystem::remove_all(dir);
    return status;
}

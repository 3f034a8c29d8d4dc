// Benchmark of the whole analysis (wane::analyze_note, default settings) on one thread: the
// issue's budget is >= 100x real time for a 4 s, 48 kHz mono note.
//
//   bench_analyze [--repeats N] [FILE...]
//   bench_analyze --write-synthetic OUT.wav   (writes the synthetic note below, 32-bit float, and exits)
//
// Without files it times the demo pluck (demo-data/steel-string-d3.wav, read with
// wane::read_audio) and a synthetic note made here (4 s at 48 kHz: 40 harmonics of 110 Hz with
// B = 1e-4, the lower ten decaying in two stages, a 20 ms burst of attack noise, noise 100 dB
// down). For each note it prints the median wall and thread-CPU time of analyze_note, the
// real-time factor (audio seconds / analysis seconds, from the CPU median: the machine is shared,
// wall time counts the other processes too), the FFT size / window / hop the tracker chose, and
// the median thread-CPU time of each stage of that same analyze_note run, as it reports its stages
// ending (wane::stage_observer): tracking, envelope fits, long spectrum, root and added peaks,
// pair split, onset refinement (the high-resolution stage), onset glides, mode split, start rise,
// noise model (streamed), recording end, peak match.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <ctime>
#include <exception>
#include <string>
#include <string_view>
#include <vector>

#include "analysis/analyze.hpp"
#include "core/rng.hpp"
#include "core/units.hpp"
#include "io/audio_file.hpp"
#include "bench_timing.hpp"

using wane::bench::median;
using wane::bench::thread_cpu_s;
using wane::bench::wall_s;
using wane::splitmix64;

namespace {

constexpr double synth_rate_hz = 48000.0;
constexpr double synth_length_s = 4.0;
constexpr double synth_f0_hz = 110.0;
constexpr double synth_b = 1e-4;
constexpr int synth_harmonics = 40;
constexpr double synth_onset_s = 0.05;        ///< leading silence (the onset must be found)
constexpr double synth_burst_s = 0.02;        ///< attack noise length
constexpr double synth_burst_amp = 0.02;      ///< attack noise RMS, linear
constexpr double synth_floor_amp = 1e-5;      ///< noise floor RMS, linear (-100 dB)
constexpr const char* default_demo_note = "demo-data/steel-string-d3.wav";

std::vector<float> make_synthetic_note() {
    const auto n = static_cast<std::size_t>(synth_length_s * synth_rate_hz);
    const auto onset = static_cast<std::size_t>(synth_onset_s * synth_rate_hz);
    std::vector<double> acc(n, 0.0);
    splitmix64 rng{20261201};
    for (int h = 1; h <= synth_harmonics; ++h) {
        const double t60_s = 6.0 / (1.0 + 0.08 * h);
        const double amp = 0.02 * std::pow(10.0, -0.8 * (h - 1) / 20.0);
        const double freq_hz = h * synth_f0_hz * std::sqrt(1.0 + synth_b * h * h);
        const double phase = wane::pi * rng.uniform_pm1();
        for (std::size_t i = onset; i < n; ++i) {
            const double t = static_cast<double>(i - onset) / synth_rate_hz;
            double level_db = -60.0 * t / t60_s;
            // The lower ten: 2.5 times faster until 0.3 s, then the slow aftersound.
            if (h <= 10) level_db = t < 0.3 ? -60.0 * t / (0.4 * t60_s) : -60.0 * 0.3 / (0.4 * t60_s) - 60.0 * (t - 0.3) / t60_s;
            acc[i] += amp * std::pow(10.0, level_db / 20.0) * std::cos(wane::two_pi * freq_hz * t + phase);
        }
    }
    const double sqrt3 = std::sqrt(3.0);
    const auto burst = static_cast<std::size_t>(synth_burst_s * synth_rate_hz);
    for (std::size_t i = 0; i < n; ++i) {
        acc[i] += synth_floor_amp * sqrt3 * rng.uniform_pm1();
        if (i >= onset && i < onset + burst) {
            const double fade = 1.0 - static_cast<double>(i - onset) / static_cast<double>(burst);
            acc[i] += synth_burst_amp * sqrt3 * fade * rng.uniform_pm1();
        }
    }
    return {acc.begin(), acc.end()};
}

void bench_note(const std::string& name, const std::vector<float>& x, double fs, int repeats) {
    const wane::analysis_params params{};
    const double audio_s = static_cast<double>(x.size()) / fs;
    std::vector<double> wall, cpu;
    // Per stage, in the order analyze_note reports them: the thread CPU time of each repeat.
    std::vector<std::string> stage_names;
    std::vector<std::vector<double>> stage_cpu;
    wane::analysis_result r;
    for (int i = 0; i < repeats; ++i) {
        std::size_t stage = 0;
        double mark = 0.0;
        const wane::stage_observer observe = [&](std::string_view finished) {
            const double now = thread_cpu_s();
            if (stage == stage_names.size()) {
                stage_names.emplace_back(finished);
                stage_cpu.emplace_back();
            }
            stage_cpu[stage++].push_back(now - mark);
            mark = thread_cpu_s();
        };
        const double w0 = wall_s(), c0 = thread_cpu_s();
        mark = c0;
        r = wane::analyze_note(x, fs, params, observe);
        cpu.push_back(thread_cpu_s() - c0);
        wall.push_back(wall_s() - w0);
    }
    const wane::tracking_result& tr = r.tracking;
    std::printf("%s: %.3f s at %.0f Hz; %d tracks, %d partials, %d segments, %zu noise bands\n", name.c_str(),
                audio_s, fs, r.summary.tracks, r.summary.partials, r.summary.segments, r.value.noise.size());
    std::printf("  tracker chose: FFT %d, window %.4f s (%.0f samples, Blackman-Harris 4-term), hop %.4f s "
                "(%.0f samples); onset %.4f s, f0 %.3f Hz\n",
                tr.fft_size, tr.window_s, tr.window_s * fs, tr.hop_s, tr.hop_s * fs, tr.onset_s, tr.f0_hz);
    const double cpu_med = median(cpu), wall_med = median(wall);
    std::printf("  analyze_note, median of %d: %.2f ms thread CPU, %.2f ms wall -> %.0fx real time (CPU), %.0fx (wall)\n",
                repeats, 1e3 * cpu_med, 1e3 * wall_med, audio_s / cpu_med, audio_s / wall_med);
    // The stages as analyze_note runs them (wane::stage_observer), each its median over the repeats.
    std::printf("  stages of analyze_note, median thread CPU:\n");
    for (std::size_t s = 0; s < stage_names.size(); ++s) {
        const double ms = 1e3 * median(stage_cpu[s]);
        std::printf("    %-22s %8.2f ms %5.1f%%\n", stage_names[s].c_str(), ms, 100.0 * ms / (1e3 * cpu_med));
    }
}

}  // namespace

int main(int argc, char** argv) {
    int repeats = 11;
    std::vector<std::string> files;
    std::string synthetic_out;
    for (int i = 1; i < argc; ++i) {
        if (std::strcmp(argv[i], "--repeats") == 0 && i + 1 < argc) {
            repeats = std::max(1, static_cast<int>(std::strtol(argv[++i], nullptr, 10)));
        } else if (std::strcmp(argv[i], "--write-synthetic") == 0 && i + 1 < argc) {
            synthetic_out = argv[++i];
        } else if (argv[i][0] == '-') {
            std::fprintf(stderr, "usage: bench_analyze [--repeats N] [--write-synthetic OUT.wav] [FILE...]\n");
            return 2;
        } else {
            files.emplace_back(argv[i]);
        }
    }
    try {
        if (!synthetic_out.empty()) {
            // The synthetic note as a 32-bit float WAV, to time a whole `wane analyze` run on it.
            wane::write_audio(synthetic_out, make_synthetic_note(), synth_rate_hz,
                              {.format = wane::sample_format::float32});
            return 0;
        }
        const bool defaults = files.empty();
        if (defaults) files.emplace_back(default_demo_note);
        for (const std::string& f : files) {
            const wane::mono_audio a = wane::read_audio(f);
            bench_note(f, a.samples, a.sample_rate_hz, repeats);
        }
        if (defaults) bench_note("synthetic note", make_synthetic_note(), synth_rate_hz, repeats);
    } catch (const std::exception& e) {
        std::fprintf(stderr, "bench_analyze: %s\n", e.what());
        return 1;
    }
    return 0;
}

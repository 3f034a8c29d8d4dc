// Benchmark of what stereo costs against mono, in one process on one thread (thread CPU time, so
// the other processes of a shared machine do not count):
//  - analysis: analyze_stereo_note (the mix analyzed, then each partial and band placed on both
//    channels) against analyze_note on the mix alone, the way `wane analyze` and
//    `wane analyze --mono` run them (default settings);
//  - render: render_channels of the stereo patch against render_patch of the mono patch (both at
//    the file's rate over the patch's length), and again with every noise band of the stereo
//    patch given coherence 0.5 (shared plus own noise in each channel: the costliest case).
// The repeats alternate stereo and mono; each figure is the median of the repeats, and each ratio
// the ratio of two medians of this one run.
//
//   bench_stereo_cost [--repeats N] FILE...      (two-channel files, e.g. ../shared/real-notes/*_stereo.wav)
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <exception>
#include <string>
#include <vector>

#include "analysis/analyze.hpp"
#include "analysis/stereo_place.hpp"
#include "io/audio_file.hpp"
#include "synthesis/render.hpp"
#include "bench_timing.hpp"
#include "bench_args.hpp"

using wane::bench::median;
using wane::bench::thread_cpu_s;

namespace {

struct timed_pair {
    std::vector<double> stereo_s, mono_s;
    [[nodiscard]] double ratio() const { return median(stereo_s) / median(mono_s); }
};

template <class Stereo, class Mono>
timed_pair time_pair(int repeats, Stereo&& stereo, Mono&& mono) {
    timed_pair t;
    for (int i = 0; i < repeats; ++i) {
        double t0 = thread_cpu_s();
        stereo();
        t.stereo_s.push_back(thread_cpu_s() - t0);
        t0 = thread_cpu_s();
        mono();
        t.mono_s.push_back(thread_cpu_s() - t0);
    }
    return t;
}

void bench_file(const std::string& path, int repeats) {
    const wane::mono_audio audio = wane::read_audio(path, {.keep_stereo = true});
    if (audio.channels.size() != 2) {
        std::fprintf(stderr, "%s: not a two-channel file, skipped\n", path.c_str());
        return;
    }
    const double rate = audio.sample_rate_hz;
    const wane::analysis_params ap{};
    wane::analysis_result stereo_result, mono_result;
    const timed_pair analysis = time_pair(
        repeats,
        [&] { stereo_result = wane::analyze_stereo_note(audio.samples, audio.channels[0], audio.channels[1], rate, ap, {}); },
        [&] { mono_result = wane::analyze_note(audio.samples, rate, ap); });
    const wane::render_params rp{.sample_rate_hz = rate};
    std::size_t sink = 0;
    const timed_pair render = time_pair(
        repeats, [&] { sink += wane::render_channels(stereo_result.value, rp).size(); },
        [&] { sink += wane::render_patch(mono_result.value, rp).size(); });
    wane::patch mixed = stereo_result.value;
    for (wane::noise_band& b : mixed.noise) b.coherence = 0.5;
    const timed_pair render_mixed = time_pair(
        repeats, [&] { sink += wane::render_channels(mixed, rp).size(); },
        [&] { sink += wane::render_patch(mono_result.value, rp).size(); });
    const double length_s = static_cast<double>(audio.samples.size()) / rate;
    std::printf("%-28s %5.1f s  %3zu/%3zu partials %2zu bands | analysis %7.1f / %7.1f ms  %.2fx | render %6.1f / %6.1f ms  "
                "%.2fx | coherence 0.5: %6.1f ms  %.2fx%s\n",
                path.c_str(), length_s, stereo_result.value.partials.size(), mono_result.value.partials.size(),
                stereo_result.value.noise.size(), 1e3 * median(analysis.stereo_s), 1e3 * median(analysis.mono_s),
                analysis.ratio(), 1e3 * median(render.stereo_s), 1e3 * median(render.mono_s), render.ratio(),
                1e3 * median(render_mixed.stereo_s), render_mixed.ratio(), sink == 0 ? " (nothing rendered)" : "");
}

}  // namespace

int main(int argc, char** argv) {
    int repeats = 5;
    std::vector<std::string> files;
    for (int i = 1; i < argc; ++i) {
        if (std::strcmp(argv[i], "--repeats") == 0 && i + 1 < argc) {
            repeats = wane::bench::int_option("bench_stereo_cost", "--repeats", argv[++i], 1);
        } else {
            files.emplace_back(argv[i]);
        }
    }
    if (files.empty()) {
        std::fprintf(stderr, "usage: bench_stereo_cost [--repeats N] FILE...   (two-channel files)\n");
        return 2;
    }
    std::printf("stereo / mono, thread CPU, median of %d alternating repeats (analysis: stereo / mono; "
                "render: stereo / mono)\n", repeats);
    try {
        for (const std::string& f : files) bench_file(f, repeats);
    } catch (const std::exception& e) {
        std::fprintf(stderr, "bench_stereo_cost: %s\n", e.what());
        return 1;
    }
    return 0;
}

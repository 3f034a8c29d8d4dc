// Benchmark of the oscillator bank (src/synthesis/render.cpp) on one core: partial-samples per
// second of thread CPU time for 10, 100 and 1000 partials over 10 s at 48 kHz, beside a naive
// reference in the same binary (per sample and partial: std::exp of the envelope line and std::cos
// of the phase, in double). Prints the median of several repeats of each and their ratio, and the
// error energy of the render against the naive reference (a check that both compute the same thing).
//
//   bench_render [--repeats N]      (default 5 repeats of the renderer, 3 of the naive reference)
//
// The naive reference is slow (~tens of ns per partial-sample), so for 1000 partials it runs over
// the first 1 s only; a rate per partial-sample does not depend on the length.
#include <algorithm>
#include <cmath>
#include <ctime>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <string>
#include <vector>

#include "core/rng.hpp"
#include "core/envelope.hpp"
#include "core/patch.hpp"
#include "synthesis/render.hpp"
#include "bench_timing.hpp"
#include "bench_args.hpp"

using wane::bench::median;
using wane::bench::thread_cpu_s;

namespace {

constexpr double bench_rate_hz = 48000.0;
constexpr double bench_length_s = 10.0;
constexpr std::uint32_t bench_seed = 20261201;

/// N partials between 40 Hz and 18 kHz (below the fade zone at 48 kHz), attack 1..10 ms, two
/// decay segments: the shape of a real analyzed note.
wane::patch make_bench_patch(int partial_count) {
    wane::splitmix64 rng{bench_seed};  // the project's generator (core/rng.hpp)
    const auto log_freq = [](wane::splitmix64& r) { return r.uniform(std::log(40.0), std::log(18000.0)); };
    const auto unit = [](wane::splitmix64& r) { return r.unit(); };
    wane::patch p;
    p.note.length_s = bench_length_s;
    for (int k = 0; k < partial_count; ++k) {
        wane::partial part;
        part.freq_hz = std::exp(log_freq(rng));
        part.phase_rad = wane::two_pi * unit(rng);
        part.env.attack_s = 0.001 + 0.009 * unit(rng);
        part.env.peak = wane::level_db{-40.0 - 20.0 * unit(rng)};
        part.env.decay = {{.t60_s = 0.5 + 3.0 * unit(rng), .until_s = 0.3 + unit(rng)},
                          {.t60_s = 2.0 + 10.0 * unit(rng), .until_s = {}}};
        p.partials.push_back(part);
    }
    wane::canonicalize(p);
    return p;
}

/// The naive reference: y[n] = sum_k A_k(n / rate) cos(2 pi f_k n / rate + phase_k), with one
/// std::exp (the envelope's dB line in nepers) and one std::cos per partial and sample, in double.
std::vector<double> render_naive(const wane::patch& p, double rate_hz, std::size_t frames) {
    std::vector<double> out(frames, 0.0);
    constexpr double neper_per_db = 1.0 / wane::db_per_neper;
    for (const wane::partial& part : p.partials) {
        const auto pieces = wane::envelope_pieces(part.env);
        const double peak_amp = wane::to_amp(part.env.peak).lin;
        for (std::size_t n = 0; n < frames; ++n) {
            const double t_s = static_cast<double>(n) / rate_hz;
            double amp = 0.0;
            if (t_s < part.env.attack_s) {
                amp = peak_amp * t_s / part.env.attack_s;
            } else {
                std::size_t i = 0;
                while (t_s >= pieces[i].end_s) ++i;
                const auto& pc = pieces[i];
                amp = std::exp(neper_per_db * (pc.start_level.db + pc.slope_db_per_s * (t_s - pc.start_s)));
            }
            out[n] += amp * std::cos(wane::two_pi * part.freq_hz * t_s + part.phase_rad);
        }
    }
    return out;
}

}  // namespace

int main(int argc, char** argv) {
    int repeats = 5;
    for (int i = 1; i < argc; ++i) {
        if (std::strcmp(argv[i], "--repeats") == 0 && i + 1 < argc) {
            repeats = wane::bench::int_option("bench_render", "--repeats", argv[++i], 1);
        } else {
            std::fprintf(stderr, "usage: bench_render [--repeats N]\n");
            return 2;
        }
    }
    const int naive_repeats = std::max(1, std::min(repeats, 3));
    std::printf("oscillator bank vs naive reference, one core (thread CPU time), %.0f Hz, %.0f s "
                "renders, median of %d (renderer) / %d (naive) repeats\n",
                bench_rate_hz, bench_length_s, repeats, naive_repeats);
    std::printf("%9s %16s %16s %8s %14s\n", "partials", "render [ps/s]", "naive [ps/s]", "ratio",
                "err/naive [dB]");
    for (const int count : {10, 100, 1000}) {
        const wane::patch p = make_bench_patch(count);
        const wane::render_params params{.sample_rate_hz = bench_rate_hz};
        const std::size_t frames = wane::render_frames(p, params);
        std::vector<double> render_s;
        std::vector<float> y;
        for (int r = 0; r < repeats; ++r) {
            const double t0 = thread_cpu_s();
            y = wane::render_patch(p, params);
            render_s.push_back(thread_cpu_s() - t0);
        }
        const std::size_t naive_frames =
            count >= 1000 ? static_cast<std::size_t>(bench_rate_hz) : frames;  // 1 s for 1000 partials
        std::vector<double> naive_s;
        std::vector<double> ref;
        for (int r = 0; r < naive_repeats; ++r) {
            const double t0 = thread_cpu_s();
            ref = render_naive(p, bench_rate_hz, naive_frames);
            naive_s.push_back(thread_cpu_s() - t0);
        }
        // Error energy of the render against the naive reference, before the end fade.
        double sig = 0.0;
        double err = 0.0;
        const std::size_t fade_begin = frames - static_cast<std::size_t>(wane::end_fade_s * bench_rate_hz);
        for (std::size_t n = 0; n < std::min(naive_frames, fade_begin); ++n) {
            sig += ref[n] * ref[n];
            const double e = static_cast<double>(y[n]) - ref[n];
            err += e * e;
        }
        const double render_rate = static_cast<double>(count) * static_cast<double>(frames) / median(render_s);
        const double naive_rate = static_cast<double>(count) * static_cast<double>(naive_frames) / median(naive_s);
        std::printf("%9d %16.3e %16.3e %8.1f %14.1f\n", count, render_rate, naive_rate,
                    render_rate / naive_rate, 10.0 * std::log10(err / sig));
    }
    return 0;
}

// Times the envelope fit of all partials of a 4 s note (the budget: under 10 ms on one
// core). The note is made here: 40 harmonics of 110 Hz at 48 kHz, T60 from 6 s down, the lower
// ten decaying in two stages, noise 100 dB down; or a WAV file given on the command line.
//   bench_fit [FILE] [repeats]
// Prints the median CPU time of fitting every track (tracking is done once, outside the timing).
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <ctime>
#include <exception>
#include <vector>

#include "core/rng.hpp"
#include "core/units.hpp"
#include "fitting/envelope_fit.hpp"
#include "io/audio_file.hpp"
#include "tracking/tracker.hpp"
#include "bench_args.hpp"

namespace {

constexpr double rate_hz = 48000.0;
constexpr double length_s = 4.0;
constexpr int harmonics = 40;
constexpr double f0_hz = 110.0;

std::vector<float> make_note() {
    wane::splitmix64 rng{40};  // the project's generator (core/rng.hpp)
    constexpr double noise_rms = 1e-5;
    const auto n = static_cast<std::size_t>(length_s * rate_hz);
    std::vector<double> acc(n, 0.0);
    for (int h = 1; h <= harmonics; ++h) {
        const double t60 = 6.0 / (1.0 + 0.08 * h);
        const double amp = 0.02 * std::pow(10.0, -0.8 * (h - 1) / 20.0);
        const double ph = rng.uniform(-wane::pi, wane::pi);
        for (std::size_t i = 0; i < n; ++i) {
            const double t = static_cast<double>(i) / rate_hz;
            // Two stages for the lower ten: 2.5 times faster until 0.3 s.
            double level_db = -60.0 * t / t60;
            if (h <= 10) level_db = t < 0.3 ? -60.0 * t / (0.4 * t60) : -60.0 * 0.3 / (0.4 * t60) - 60.0 * (t - 0.3) / t60;
            acc[i] += amp * std::pow(10.0, level_db / 20.0) * std::cos(wane::two_pi * f0_hz * h * t + ph);
        }
    }
    std::vector<float> out(n);
    for (std::size_t i = 0; i < n; ++i) out[i] = static_cast<float>(acc[i] + noise_rms * rng.gaussian());
    return out;
}

double cpu_s() {
    timespec t{};
    clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &t);
    return static_cast<double>(t.tv_sec) + 1e-9 * static_cast<double>(t.tv_nsec);
}

}  // namespace

int main(int argc, char** argv) {
    try {
        std::vector<float> x;
        double fs = rate_hz;
        if (argc > 1) {
            const wane::mono_audio a = wane::read_audio(argv[1]);
            x = a.samples;
            fs = a.sample_rate_hz;
        } else {
            x = make_note();
        }
        const int repeats = argc > 2 ? wane::bench::int_option("bench_fit", "REPEATS", argv[2], 1) : 21;
        const wane::tracking_result tr = wane::track_note(x, fs, {});
        const wane::envelope_fit_params params{.window_s = tr.window_s};
        std::size_t frames = 0;
        for (const auto& t : tr.tracks) frames += t.points.size();
        std::vector<double> times;
        int fitted = 0, segments = 0;
        for (int r = 0; r < repeats; ++r) {
            fitted = segments = 0;
            const double t0 = cpu_s();
            for (const auto& t : tr.tracks) {
                const auto f = wane::fit_partial(t, params);
                if (f) {
                    ++fitted;
                    segments += static_cast<int>(f->env.decay.size());
                }
            }
            times.push_back(cpu_s() - t0);
        }
        std::sort(times.begin(), times.end());
        std::printf("%s: %.2f s at %.0f Hz, %zu tracks, %zu frames (hop %.4f s)\n", argc > 1 ? argv[1] : "synthetic note",
                    static_cast<double>(x.size()) / fs, fs, tr.tracks.size(), frames, tr.hop_s);
        std::printf("fit all partials: median %.3f ms CPU over %d repeats (min %.3f, max %.3f); %d fitted, %d segments\n",
                    1e3 * times[times.size() / 2], repeats, 1e3 * times.front(), 1e3 * times.back(), fitted, segments);
    } catch (const std::exception& e) {
        std::fprintf(stderr, "bench_fit: %s\n", e.what());
        return 1;
    }
    return 0;
}

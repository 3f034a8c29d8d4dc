// Benchmark of a render's noise part against its partials (the budget: the noise part
// costs no more than the partials of a 40-partial note). One thread, 4 s at 48 kHz, median thread
// CPU time of several repeats, all cases measured in the same run (48 kHz unless --rate):
//   partials  - render_patch of 40 harmonics of 110 Hz (B = 1e-4, attack 2 ms, two decay
//               segments with T60s like a plucked string's), include_noise off;
//   typical   - add_noise_bands of the 24 one-third-octave bands of core/noise_bands.hpp with an attack
//               envelope (attack 2 ms, peak -30..-54 dB, T60 60..200 ms then 0.5..1 s);
//   held      - the worst case: the same 24 bands with t60 = inf, held at -40 dB for the whole note;
//   demo      - the [[noise]] bands the analysis fits to the demo pluck (demo-data/steel-string-d3.wav),
//               when that file is readable (run from the source folder, or pass its path).
// It prints each time and its ratio to the partials' time.
//
//   bench_noise [--repeats N] [--rate HZ] [DEMO_WAV]
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstdint>
#include <cstring>
#include <ctime>
#include <exception>
#include <filesystem>
#include <string>
#include <vector>

#include "analysis/analyze.hpp"
#include "core/noise_bands.hpp"
#include "core/patch.hpp"
#include "io/audio_file.hpp"
#include "synthesis/noise_render.hpp"
#include "synthesis/render.hpp"
#include "bench_timing.hpp"
#include "bench_args.hpp"

using wane::bench::median;
using wane::bench::thread_cpu_s;

namespace {

double rate_hz = 48000.0;  ///< --rate HZ
constexpr double length_s = 4.0;
constexpr int partial_count = 40;
constexpr double f0_hz = 110.0;
constexpr double inharmonicity_b = 1e-4;
constexpr double attack_s = 0.002;
constexpr double held_level_db = -40.0;
constexpr const char* default_demo_note = "demo-data/steel-string-d3.wav";

wane::patch partial_patch() {
    wane::patch p;
    p.note.f0_hz = f0_hz;
    p.note.length_s = length_s;
    for (int h = 1; h <= partial_count; ++h) {
        const double t60_s = 6.0 / (1.0 + 0.08 * h);
        wane::partial q;
        q.harmonic = h;
        q.freq_hz = h * f0_hz * std::sqrt(1.0 + inharmonicity_b * h * h);
        q.phase_rad = 0.37 * h;
        q.env.attack_s = attack_s;
        q.env.peak = wane::level_db{-20.0 - 0.8 * (h - 1)};
        q.env.decay = {{.t60_s = 0.4 * t60_s, .until_s = 0.3}, {.t60_s = t60_s, .until_s = {}}};
        p.partials.push_back(q);
    }
    wane::canonicalize(p);
    return p;
}

std::vector<wane::noise_band> octave_bands(bool held) {
    std::vector<wane::noise_band> bands;
    const auto layout = wane::noise_band_layout(rate_hz / 2.0);
    for (std::size_t i = 0; i < layout.size(); ++i) {
        const double k = static_cast<double>(i) / static_cast<double>(layout.size() - 1);  // 0 low .. 1 high
        wane::noise_band b{.low_hz = layout[i].low_hz, .high_hz = layout[i].high_hz, .env = {}, .place = {}, .coherence = 1.0};
        b.env.attack_s = attack_s;
        if (held) {
            b.env.peak = wane::level_db{held_level_db};
            b.env.decay = {{.t60_s = wane::infinity, .until_s = {}}};
        } else {
            // Pick noise: loudest in the middle bands, the high bands dying fastest.
            b.env.peak = wane::level_db{-30.0 - 24.0 * std::abs(k - 0.5)};
            b.env.decay = {{.t60_s = 0.2 - 0.14 * k, .until_s = 0.05}, {.t60_s = 1.0 - 0.5 * k, .until_s = {}}};
        }
        bands.push_back(b);
    }
    return bands;
}

/// FNV-1a 64 over the samples' bits: shows whether two builds render the same noise bit for bit.
std::uint64_t fnv1a(const std::vector<float>& x) {
    std::uint64_t h = 0xcbf29ce484222325ULL;
    for (float v : x) {
        std::uint32_t bits = 0;
        std::memcpy(&bits, &v, sizeof bits);
        for (int b = 0; b < 4; ++b) {
            h ^= (bits >> (8 * b)) & 0xffU;
            h *= 0x100000001b3ULL;
        }
    }
    return h;
}

double time_noise(const std::vector<wane::noise_band>& bands, int repeats, double& rms_out, std::uint64_t& hash_out) {
    const auto frames = static_cast<std::size_t>(std::llround(length_s * rate_hz));
    std::vector<float> out(frames);
    std::vector<double> t;
    for (int r = 0; r < repeats; ++r) {
        std::fill(out.begin(), out.end(), 0.0f);
        const double c0 = thread_cpu_s();
        wane::add_noise_bands(bands, {.sample_rate_hz = rate_hz}, out);
        t.push_back(thread_cpu_s() - c0);
    }
    double sq = 0.0;
    for (float v : out) sq += static_cast<double>(v) * static_cast<double>(v);
    rms_out = std::sqrt(sq / static_cast<double>(frames));
    hash_out = fnv1a(out);
    return median(t);
}

}  // namespace

int main(int argc, char** argv) {
    int repeats = 21;
    std::string demo = default_demo_note;
    for (int i = 1; i < argc; ++i) {
        if (std::strcmp(argv[i], "--repeats") == 0 && i + 1 < argc) {
            repeats = wane::bench::int_option("bench_noise", "--repeats", argv[++i], 1);
        } else if (std::strcmp(argv[i], "--rate") == 0 && i + 1 < argc) {
            rate_hz = wane::bench::number_option("bench_noise", "--rate", argv[++i]);
            if (!(rate_hz >= 8000.0 && rate_hz <= 192000.0)) {
                std::fprintf(stderr, "bench_noise: --rate %s: need 8000 .. 192000 Hz\n", argv[i]);
                return 2;
            }
        } else if (argv[i][0] == '-') {
            std::fprintf(stderr, "usage: bench_noise [--repeats N] [--rate HZ] [DEMO_WAV]\n");
            return 2;
        } else {
            demo = argv[i];
        }
    }
    try {
        const wane::patch p = partial_patch();
        const wane::render_params rp{.sample_rate_hz = rate_hz, .length_s = length_s, .include_noise = false};
        std::vector<double> t;
        for (int r = 0; r < repeats; ++r) {
            const double c0 = thread_cpu_s();
            const std::vector<float> y = wane::render_patch(p, rp);
            t.push_back(thread_cpu_s() - c0);
        }
        const double partials_s = median(t);
        std::printf("one thread, %.0f s at %.0f Hz, median thread CPU of %d repeats\n", length_s, rate_hz, repeats);
        std::printf("  %-44s %9.3f ms  ratio 1.00\n", "partials: 40-partial note, no noise", 1e3 * partials_s);

        struct noise_case {
            std::string name;
            std::vector<wane::noise_band> bands;
        };
        std::vector<noise_case> cases{{"noise, typical: 24 bands, attack envelope", octave_bands(false)},
                                      {"noise, worst: 24 bands held (t60 = inf)", octave_bands(true)}};
        if (std::filesystem::exists(demo)) {
            const wane::mono_audio a = wane::read_audio(demo);
            const wane::analysis_result r = wane::analyze_note(a.samples, a.sample_rate_hz, {});
            cases.push_back({"noise, demo pluck's " + std::to_string(r.value.noise.size()) + " fitted bands",
                             r.value.noise});
        } else {
            std::printf("  (no %s: the demo pluck's bands are not timed)\n", demo.c_str());
        }
        for (const noise_case& c : cases) {
            double rms = 0.0;
            std::uint64_t hash = 0;
            const double s = time_noise(c.bands, repeats, rms, hash);
            std::printf("  %-44s %9.3f ms  ratio %.2f  (output RMS %.1f dB, FNV-1a %016llx)\n", c.name.c_str(), 1e3 * s,
                        s / partials_s, 20.0 * std::log10(std::max(rms, 1e-30)), static_cast<unsigned long long>(hash));
        }
    } catch (const std::exception& e) {
        std::fprintf(stderr, "bench_noise: %s\n", e.what());
        return 1;
    }
    return 0;
}

// Times track_note on a WAV file and prints what it found.
//   bench_track FILE [repeats] [f0_hz]
#include <chrono>
#include <ctime>
#include <algorithm>
#include <cstdio>
#include <cstdlib>
#include <exception>
#include <sndfile.h>
#include <vector>

#include "tracking/tracker.hpp"
#include "bench_args.hpp"

int main(int argc, char** argv) {
    if (argc < 2) {
        std::fprintf(stderr, "usage: bench_track FILE [repeats] [f0_hz]\n");
        return 2;
    }
    SF_INFO info{};
    SNDFILE* f = sf_open(argv[1], SFM_READ, &info);
    if (f == nullptr) {
        std::fprintf(stderr, "bench_track: cannot open %s\n", argv[1]);
        return 1;
    }
    // First channel, read in blocks so the peak memory is the mono samples plus the tracker's.
    std::vector<float> mono(static_cast<std::size_t>(info.frames));
    {
        constexpr sf_count_t block = 65536;
        std::vector<float> inter(static_cast<std::size_t>(block * info.channels));
        for (sf_count_t pos = 0; pos < info.frames;) {
            const sf_count_t got = sf_readf_float(f, inter.data(), std::min(block, info.frames - pos));
            if (got <= 0) break;
            for (sf_count_t i = 0; i < got; ++i) mono[pos + i] = inter[i * info.channels];
            pos += got;
        }
    }
    sf_close(f);
    const int repeats = argc > 2 ? wane::bench::int_option("bench_track", "REPEATS", argv[2], 1) : 5;
    wane::tracking_params params;
    if (argc > 3) params.f0_hz = wane::bench::number_option("bench_track", "F0_HZ", argv[3]);
    const double fs = info.samplerate;
    try {
        wane::tracking_result r;
        double best_s = 1e9;
        for (int i = 0; i < repeats; ++i) {
            // CPU time of this process: the machine is shared, wall time would count the others.
            timespec t0{}, t1{};
            clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &t0);
            r = wane::track_note(mono, fs, params);
            clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &t1);
            best_s = std::min(best_s, double(t1.tv_sec - t0.tv_sec) + 1e-9 * double(t1.tv_nsec - t0.tv_nsec));
        }
        const double dur_s = double(info.frames) / fs;
        std::printf("file %s: %.3f s at %.0f Hz\n", argv[1], dur_s, fs);
        std::printf("track_note best of %d: %.2f ms CPU = %.0fx real time\n", repeats, best_s * 1e3, dur_s / best_s);
        std::printf("onset %.4f s, f0 %.3f Hz, B %.3g, window %.4f s, fft %d, hop %.4f s, tracks %zu\n",
                    r.onset_s, r.f0_hz, r.inharmonicity_b, r.window_s, r.fft_size, r.hop_s, r.tracks.size());
        for (const auto& t : r.tracks) {
            double peak = -1e9, fsum = 0.0;
            for (const auto& p : t.points) { peak = std::max(peak, p.level_db); fsum += p.freq_hz; }
            std::printf("  n=%2d  f=%9.3f Hz  peak %6.1f dB  floor %6.1f dB  %.3f..%.3f s (%zu)%s\n", t.harmonic,
                        fsum / double(t.points.size()), peak, t.points.front().floor_db,
                        t.points.front().time_s, t.points.back().time_s, t.points.size(),
                        t.cut_by_end ? " cut" : "");
        }
        if (const char* dump = std::getenv("BENCH_TRACK_DUMP")) {
            const int want = wane::bench::int_option("bench_track", "BENCH_TRACK_DUMP", dump, 0);
            for (const auto& t : r.tracks)
                if (t.harmonic == want)
                    for (const auto& p : t.points)
                        std::printf("    t=%.3f f=%.3f L=%.1f floor=%.1f ph=%.3f\n", p.time_s, p.freq_hz, p.level_db, p.floor_db, p.phase_rad);
        }
    } catch (const std::exception& e) {
        std::printf("error: %s\n", e.what());
        return 1;
    }
    return 0;
}

// Benchmark of the whole analysis (wane::analyze_note, default settings) on one thread: the
// issue's budget is >= 100x real time for a 4 s, 48 kHz mono note.
//
//   bench_analyze [--repeats N] [FILE...]
//
// Without files it times the demo pluck (demo-data/steel-string-d3.wav, read with
// wane::read_audio) and a synthetic note made here (4 s at 48 kHz: 40 harmonics of 110 Hz with
// B = 1e-4, the lower ten decaying in two stages, a 20 ms burst of attack noise, noise 100 dB
// down). For each note it prints the median wall and thread-CPU time of analyze_note, the
// real-time factor (audio seconds / analysis seconds, from the CPU median: the machine is shared,
// wall time counts the other processes too), the FFT size / window / hop the tracker chose, and
// the median CPU time of the stages timed separately: track_note, the envelope fits of all
// tracks, and the noise model (the partials' resynthesis plus fit_noise_bands), as analyze.cpp
// runs them; the noise model split into the resynthesis, the band measurement and the band fits;
// and the streamed noise model (fit_note_noise, which never holds the residual whole), checked
// to give the same bands.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <ctime>
#include <exception>
#include <string>
#include <vector>

#include "analysis/analyze.hpp"
#include "analysis/noise_model.hpp"
#include "core/rng.hpp"
#include "core/units.hpp"
#include "fitting/envelope_fit.hpp"
#include "io/audio_file.hpp"
#include "synthesis/render.hpp"
#include "tracking/tracker.hpp"
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
    wane::analysis_result r;
    for (int i = 0; i < repeats; ++i) {
        const double w0 = wall_s(), c0 = thread_cpu_s();
        r = wane::analyze_note(x, fs, params);
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

    // The stages alone, as analyze.cpp runs them (default settings: the whole file).
    std::vector<double> track_t, fit_t, noise_t, resynth_t, measure_t, stream_t, refine_t, peak_t;
    for (int i = 0; i < repeats; ++i) {
        double c0 = thread_cpu_s();
        const wane::tracking_result t = wane::track_note(x, fs, params.tracking);
        track_t.push_back(thread_cpu_s() - c0);

        c0 = thread_cpu_s();
        const wane::envelope_fit_params fp{.max_segments = params.max_segments, .window_s = t.window_s};
        wane::patch p;
        for (const wane::partial_track& track : t.tracks) {
            const auto f = wane::fit_partial(track, fp);
            if (f && f->env.peak.db <= wane::max_peak_db)
                p.partials.push_back({.freq_hz = f->freq_hz, .harmonic = track.harmonic, .phase_rad = f->phase_rad, .env = f->env, .place = {}});
        }
        fit_t.push_back(thread_cpu_s() - c0);

        const auto onset = static_cast<std::size_t>(std::llround(t.onset_s * fs));
        const std::span<const float> note = std::span<const float>(x).subspan(onset);
        p.note.length_s = r.value.note.length_s;
        {
            // The onset refinement and the peak match on a copy (the stages below see the
            // partials as the fits gave them, as before).
            wane::patch refined = p;
            c0 = thread_cpu_s();
            (void)wane::refine_onset(refined, note, fs, params.onset);
            refine_t.push_back(thread_cpu_s() - c0);
            c0 = thread_cpu_s();
            (void)wane::peak_matching_gain_db(refined, note, fs);
            peak_t.push_back(thread_cpu_s() - c0);
        }
        c0 = thread_cpu_s();
        const std::vector<float> partials_only = wane::render_patch(
            p, {.sample_rate_hz = fs, .length_s = static_cast<double>(note.size()) / fs, .include_noise = false});
        std::vector<float> residual(note.begin(), note.end());
        for (std::size_t k = 0; k < std::min(residual.size(), partials_only.size()); ++k) residual[k] -= partials_only[k];
        resynth_t.push_back(thread_cpu_s() - c0);
        std::vector<double> freqs_hz;
        double loudest_db = -wane::infinity;
        for (const auto& q : p.partials) {
            freqs_hz.push_back(q.freq_hz);
            loudest_db = std::max(loudest_db, q.env.peak.db);
        }
        const auto bands = wane::fit_noise_bands(residual, fs, freqs_hz, loudest_db, params.noise);
        noise_t.push_back(thread_cpu_s() - c0);
        // The band measurement alone (fit_noise_bands runs it first, then fits the bands).
        const double m0 = thread_cpu_s();
        (void)wane::measure_noise_bands(residual, fs, freqs_hz, 0.0, params.noise);
        measure_t.push_back(thread_cpu_s() - m0);
        if (bands.size() != r.value.noise.size()) std::printf("  (stage run gave %zu noise bands)\n", bands.size());
        // The streamed noise model (fit_note_noise: the residual formed a block at a time).
        const double s0 = thread_cpu_s();
        const auto streamed = wane::fit_note_noise(note, fs, p, params.noise);
        stream_t.push_back(thread_cpu_s() - s0);
        if (i == 0 && !(streamed == bands)) {
            std::printf("  streamed noise model differs from the held residual's:\n");
            for (std::size_t b = 0; b < std::min(streamed.size(), bands.size()); ++b)
                std::printf("    band %.0f Hz: peak %.6f vs %.6f dB, t60 %.6f vs %.6f s\n", bands[b].low_hz,
                            streamed[b].env.peak.db, bands[b].env.peak.db, streamed[b].env.decay.front().t60_s,
                            bands[b].env.decay.front().t60_s);
        }
    }
    const double sum = median(track_t) + median(fit_t) + median(noise_t);
    std::printf("  stages, median thread CPU: track_note %.2f ms (%.0f%%), envelope fits %.2f ms (%.0f%%), "
                "noise model %.2f ms (%.0f%%)\n",
                1e3 * median(track_t), 100.0 * median(track_t) / sum, 1e3 * median(fit_t), 100.0 * median(fit_t) / sum,
                1e3 * median(noise_t), 100.0 * median(noise_t) / sum);
    std::printf("  noise model: partials' resynthesis and residual %.2f ms, band measurement %.2f ms, band fits ~%.2f ms\n",
                1e3 * median(resynth_t), 1e3 * median(measure_t),
                1e3 * (median(noise_t) - median(resynth_t) - median(measure_t)));
    std::printf("  noise model streamed (fit_note_noise): %.2f ms\n", 1e3 * median(stream_t));
    std::printf("  onset refinement (least squares at the onset, subband ESPRIT) %.2f ms, peak match %.2f ms\n",
                1e3 * median(refine_t), 1e3 * median(peak_t));
}

}  // namespace

int main(int argc, char** argv) {
    int repeats = 11;
    std::vector<std::string> files;
    for (int i = 1; i < argc; ++i) {
        if (std::strcmp(argv[i], "--repeats") == 0 && i + 1 < argc) {
            repeats = std::max(1, std::atoi(argv[++i]));
        } else if (argv[i][0] == '-') {
            std::fprintf(stderr, "usage: bench_analyze [--repeats N] [FILE...]\n");
            return 2;
        } else {
            files.emplace_back(argv[i]);
        }
    }
    try {
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

#include "cli/keymap_render.hpp"

#include <cmath>

#include "cli/common.hpp"
#include "cli/loudness.hpp"
#include "core/text_format.hpp"
#include "io/errors.hpp"

namespace wane::cli {

namespace {
/// Peak of the loudest render after a common gain was needed: 1 dB below full scale leaves room
/// for the reconstruction peaks between samples (common practice, no source).
constexpr double keymap_peak_target_db = -1.0;
constexpr std::size_t keymap_memory_budget_bytes = std::size_t{1} << 30;  // 1 GiB of float samples
/// Threads of the write phase when the renders are kept in memory: writing is bound by the
/// latency of each file's fsync (atomic output), not by the CPU, so more writes in flight than
/// cores shorten the wall time (measured: see tools/bench_keymap.cpp).
constexpr int keymap_writer_threads = 8;

/// The one common gain of the set: 1, or what brings the loudest render to keymap_peak_target_db
/// (said in a warning). Refuses a set too loud to scale. peak is set to the loudest peak.
double common_gain(const std::vector<double>& peaks, const std::vector<keymap_job>& jobs, const std::string& set_name,
                   double& peak) {
    std::size_t loudest = 0;
    for (std::size_t i = 1; i < peaks.size(); ++i) {
        if (!(peaks[i] <= peaks[loudest])) loudest = i;  // NaN counts as loudest
    }
    peak = peaks[loudest];
    refuse_too_loud(peak, set_name + ": " + jobs[loudest].sample);
    double gain = 1.0;
    if (peak > 1.0) {
        gain = to_amp(level_db{keymap_peak_target_db}).lin / peak;
        warn("the loudest render (" + jobs[loudest].sample + ") peaks at " +
             printf_text("%.2f", to_level(amp_lin{peak}).db) + " dBFS: all " + std::to_string(jobs.size()) +
             " renders are scaled by one common gain of " + printf_text("%.2f", to_level(amp_lin{gain}).db) +
             " dB (layers keep their levels) so it peaks at " + printf_text("%.1f", keymap_peak_target_db) + " dBFS");
    }
    return gain;
}
}  // namespace

std::string staged_message(std::string what, const std::filesystem::path& stage, const std::filesystem::path& dir) {
    const std::string from = stage.string();
    for (std::size_t at = what.find(from); at != std::string::npos; at = what.find(from, at)) {
        what.replace(at, from.size(), dir.string());
    }
    while (!what.empty() && (what.back() == '.' || what.back() == ' ')) what.pop_back();
    return what + "; nothing of the new set was written (" + dir.string() + " is as it was)";
}

namespace {

/// A sample as its file holds it: the render of a mono patch, or a stereo patch's two channels
/// interleaved (a stereo set's SFZ references these stereo WAVs as it does mono ones).
std::vector<float> render_for_file(const patch& p, const render_params& params) {
    if (!is_stereo(p)) return render_patch(p, params);
    return interleave(render_channels(p, params));
}

}  // namespace

keymap_render_result render_set(const keymap_render_request& r, const std::filesystem::path& stage_dir,
                                const std::filesystem::path& dir, progress_bar& bar) {
    const std::vector<keymap_job>& jobs = r.jobs;
    std::size_t total_frames = 0;
    for (std::size_t i = 0; i < jobs.size(); ++i)
        total_frames += render_frames(r.patches[i], r.renders[i]) * static_cast<std::size_t>(r.patches[i].note.channels);
    const bool keep = total_frames <= keymap_memory_budget_bytes / sizeof(float);
    std::vector<std::vector<float>> kept(keep ? jobs.size() : 0);
    keymap_render_result result;
    result.peaks.assign(jobs.size(), 0.0);
    parallel_for(jobs.size(), r.threads, [&](std::size_t i) {
        std::vector<float> x = render_for_file(r.patches[i], r.renders[i]);
        result.peaks[i] = peak_abs(x);
        if (keep) kept[i] = std::move(x);
        bar.advance();
    });
    result.gain = common_gain(result.peaks, jobs, r.set_name, result.peak);
    const double gain = result.gain;
    const auto gain_f = static_cast<float>(gain);
    const int write_threads = keep ? std::max(r.threads, keymap_writer_threads) : r.threads;
    parallel_for(jobs.size(), write_threads, [&](std::size_t i) {
        std::vector<float> x = keep ? std::move(kept[i]) : render_for_file(r.patches[i], r.renders[i]);
        if (gain != 1.0) {
            for (float& v : x) v *= gain_f;
        }
        try {
            write_audio(stage_dir / jobs[i].sample, x, r.rate_hz, {.format = r.format, .root_midi = jobs[i].root_midi,
                                                                   .channels = r.patches[i].note.channels});
        } catch (const std::exception& e) {
            throw wane::io_error(staged_message(e.what(), stage_dir, dir));
        }
        bar.advance();
    });
    return result;
}

}  // namespace wane::cli

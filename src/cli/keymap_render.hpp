// Rendering and writing a keymap set: every job on all cores, one common gain for the whole set
// (never clip silently), the WAVs written into the staging folder.
//
// Levels: all renders share one gain so the layers keep their relative levels. If the loudest
// render would exceed full scale, every render is scaled by the same gain so that it peaks at
// keymap_peak_target_db, and a warning says so with the peak found.
// Memory: the renders are kept in memory between measuring the peak and writing when they fit in
// keymap_memory_budget_bytes; otherwise each is rendered twice (once for the peak, once to write).
#pragma once

#include <algorithm>
#include <atomic>
#include <exception>
#include <filesystem>
#include <mutex>
#include <string>
#include <thread>
#include <vector>

#include "core/patch.hpp"
#include "io/audio_file.hpp"
#include "platform/progress.hpp"
#include "synthesis/render.hpp"
#include "transform/keymap.hpp"

namespace wane::cli {

/// Runs work(i) for i in [0, count) on `threads` threads; the first exception stops the rest and
/// is rethrown here.
template <class Work>
void parallel_for(std::size_t count, int threads, Work work) {
    std::atomic<std::size_t> next{0};
    std::atomic<bool> failed{false};
    std::exception_ptr error;
    std::mutex error_mutex;
    auto worker = [&] {
        while (!failed.load()) {
            const std::size_t i = next.fetch_add(1);
            if (i >= count) return;
            try {
                work(i);
            } catch (...) {
                std::lock_guard lock(error_mutex);
                if (!error) error = std::current_exception();
                failed = true;
            }
        }
    };
    const std::size_t n = std::min<std::size_t>(static_cast<std::size_t>(std::max(threads, 1)), count);
    std::vector<std::thread> pool;
    for (std::size_t t = 1; t < n; ++t) pool.emplace_back(worker);
    worker();
    for (std::thread& t : pool) t.join();
    if (error) std::rethrow_exception(error);
}

/// A write error from the staging folder, told as the destination's: the staging path replaced
/// by the output folder, and what became of the folder.
std::string staged_message(std::string what, const std::filesystem::path& stage, const std::filesystem::path& dir);

struct keymap_render_request {
    const std::vector<patch>& patches;
    const std::vector<render_params>& renders;
    const std::vector<keymap_job>& jobs;
    std::string set_name;  ///< for messages (the input patch, or the set)
    double rate_hz = 0.0;
    sample_format format = sample_format::pcm24;
    int threads = 1;
};

struct keymap_render_result {
    double gain = 1.0;          ///< the common gain applied to every render
    double peak = 0.0;          ///< the loudest render's peak before the gain
    std::vector<double> peaks;  ///< every job's peak before the gain
};

/// Renders every job, levels the set by one common gain and writes the WAVs into stage_dir
/// (errors told as dir's).
keymap_render_result render_set(const keymap_render_request& r, const std::filesystem::path& stage_dir,
                                const std::filesystem::path& dir, progress_bar& bar);

}  // namespace wane::cli

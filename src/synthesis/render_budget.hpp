// The render budget: limits checked (by the CLI, before any work starts) so a hostile or
// mistaken patch cannot make a render run for hours or take all memory. (Input-file limits live with the reader:
// audio_read_options in io/audio_file.hpp.)
#pragma once

#include <cstddef>
#include <cstdint>
#include <filesystem>

#include "core/patch.hpp"

namespace wane {

/// Largest render accepted, in partial-samples (rendered partials x output frames): the work of
/// the oscillator bank. 1e11 admits the largest patch (4096 partials) for 60 s at 48 kHz
/// (1.18e10) and up to 508 s at 48 kHz; it refuses 4096 partials x 600 s x 192 kHz (4.72e11).
/// The bound is our choice (no source). Measured with `build/tools/bench_render --repeats 1`
/// (2026-12-01, this project's 2-core build machine): 5.8e9 partial-samples per second of one
/// core for 1000 partials, so the budget is about 17 s of one core.
inline constexpr double max_render_partial_samples = 1e11;
/// Largest output buffer accepted (the render is held in memory as float before it is written):
/// 1 GiB. Under the format's limits (600 s, 192 kHz: 461 MB) it is never reached; it guards the
/// day those limits grow.
inline constexpr std::uintmax_t max_render_buffer_bytes = std::uintmax_t{1} << 30;

/// Work of one noise band per output frame, in partial-samples: the noise renderer overlap-adds
/// pooled unit frames, so its cost grows with bands x frames like the oscillator bank's. Measured
/// with `build/tools/bench_noise --repeats 41` (2026-12-02, this project's 2-core machine): 9
/// bands held for the whole note cost 0.61x-0.71x of 40 partials, i.e. 2.7-3.2 partial-samples per
/// band-sample; 4 rounds that up.
inline constexpr double noise_band_work_partial_samples = 4.0;

/// What a render would cost.
struct render_cost {
    std::size_t partials = 0;  ///< partials the renderer computes (below Nyquist, non-zero peak)
    std::size_t noise_bands = 0;  ///< noise bands the renderer computes
    std::size_t frames = 0;    ///< output frames
    /// The work: (partials + noise_band_work_partial_samples x noise bands) x frames.
    double partial_samples = 0.0;
    std::uintmax_t buffer_bytes = 0;  ///< the float output buffer: frames * sizeof(float)
};

/// The cost of rendering p at rate_hz for length_s (0 or less: the patch's note.length_s).
render_cost render_cost_of(const patch& p, double rate_hz, double length_s);

/// Throws std::runtime_error naming the patch (and --max-work, the option that raises the budget) (patch_path, when given), the partials, length and
/// rate, the product, the budget and the memory the output buffer would take, when the render is
/// over max_render_partial_samples or max_render_buffer_bytes. Call before render_patch.
void check_render_budget(const patch& p, double rate_hz, double length_s,
                         const std::filesystem::path& patch_path = {},
                         double budget_partial_samples = max_render_partial_samples);

}  // namespace wane

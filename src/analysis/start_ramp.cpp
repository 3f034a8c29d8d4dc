#include "analysis/start_ramp.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <cstdint>
#include <vector>

#include "core/envelope.hpp"
#include "core/glide.hpp"
#include "core/units.hpp"

namespace wane {

namespace {

/// The patch keeps envelope times to 0.1 ms (core/patch_numbers.hpp fmt_time): rises are multiples.
constexpr double ramp_step_s = 1e-4;

/// Largest |x[n] - x[n - 1]| over n in [from, min(to, x.size())), x[-1] = 0 (silence before).
double largest_step(std::span<const double> x, std::size_t from, std::size_t to = SIZE_MAX) {
    double step = 0.0;
    for (std::size_t n = from; n < std::min(to, x.size()); ++n) step = std::max(step, std::abs(x[n] - (n > 0 ? x[n - 1] : 0.0)));
    return step;
}

}  // namespace

partial with_rise(const partial& q, double rise_s) {
    partial out = q;
    if (q.env.attack_s == 0.0 && rise_s > 0.0) {
        out.env.peak = envelope_level(q.env, rise_s);
        out.env.attack_s = rise_s;
    }
    return out;
}

std::vector<double> copy_start(const patch& p, double sample_rate_hz, std::size_t count, double rise_s) {
    std::vector<double> out(count, 0.0);
    for (const partial& original : p.partials) {
        const partial q = with_rise(original, rise_s);
        const std::vector<envelope_piece> pieces = envelope_pieces(q.env);  // made once, not per sample
        for (std::size_t n = 0; n < count; ++n) {
            const double t = static_cast<double>(n) / sample_rate_hz;
            const double glide_rad = glide_phase_offset_rad(q.freq_hz, q.glide_cents, q.glide_s, t);
            out[n] += envelope_amp(q.env, pieces, t).lin * std::cos(two_pi * q.freq_hz * t + q.phase_rad + glide_rad);
        }
    }
    return out;
}

start_ramp_result soften_start(patch& p, std::span<const float> part, std::size_t onset, double sample_rate_hz,
                               const start_ramp_params& params) {
    assert(sample_rate_hz > 0.0 && params.max_ramp_s >= 0.0);
    start_ramp_result result;
    if (onset >= part.size() || p.partials.empty()) return result;
    const auto before = std::min(onset, static_cast<std::size_t>(std::llround(params.before_s * sample_rate_hz)));
    const auto after = std::max<std::size_t>(2, static_cast<std::size_t>(std::llround(params.after_s * sample_rate_hz)));
    const std::size_t end = std::min(part.size(), onset + after);
    for (std::size_t n = onset - before + 1; n < end; ++n)
        result.recording_step =
            std::max(result.recording_step, std::abs(static_cast<double>(part[n]) - static_cast<double>(part[n - 1])));

    const auto longest = after + static_cast<std::size_t>(std::ceil(params.max_ramp_s * sample_rate_hz));
    const std::vector<double> instant = copy_start(p, sample_rate_hz, longest, 0.0);
    result.copy_step_before = largest_step(instant, 0);
    result.copy_step_after = result.copy_step_before;
    // The copy's own waveform after its first sample is no click; only the start is held to it.
    // Both over the first after_s; a relative 1e-6 for the recording's float samples.
    const double allowed = std::max(result.recording_step, largest_step(instant, 1, after)) * (1.0 + 1e-6);
    // Only a start clearly steeper than that gets a rise (a copy's levels are fitted, not exact).
    if (result.copy_step_before <= params.steeper_factor * allowed) return result;
    // Rises on the patch's time grid (core/patch_numbers.hpp: envelope times keep 0.1 ms).
    const auto steps = static_cast<int>(std::floor(params.max_ramp_s / ramp_step_s + 1e-9));
    for (int k = 1; k <= steps; ++k) {
        result.rise_s = k * ramp_step_s;
        // Steps over the rise and the sample after it: later ones are the copy's own waveform.
        const auto rise_end = static_cast<std::size_t>(std::ceil(result.rise_s * sample_rate_hz)) + 2;
        result.copy_step_after = largest_step(copy_start(p, sample_rate_hz, longest, result.rise_s), 0, rise_end);
        if (result.copy_step_after <= allowed) break;
    }
    for (partial& q : p.partials) q = with_rise(q, result.rise_s);
    return result;
}

}  // namespace wane

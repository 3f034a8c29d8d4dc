#include "analysis/recording_end.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <vector>

#include "core/units.hpp"

namespace wane {

recording_end classify_recording_end(std::span<const float> note, double sample_rate_hz,
                                     const recording_end_params& params) {
    assert(sample_rate_hz > 0.0);
    recording_end out;
    out.length_s = static_cast<double>(note.size()) / sample_rate_hz;
    const auto frame = static_cast<std::size_t>(std::max(1.0, std::round(params.frame_s * sample_rate_hz)));
    const auto hop = static_cast<std::size_t>(std::max(1.0, std::round(params.hop_s * sample_rate_hz)));
    const auto end_frames = static_cast<std::size_t>(std::max(1.0, std::round(params.end_window_s * sample_rate_hz)));
    if (note.size() < std::max(frame, end_frames)) return out;

    // Mean power per frame; frames end-aligned so the last one ends at the recording's end.
    std::vector<double> power;
    for (std::size_t end = note.size(); end >= frame; end -= std::min(hop, end)) {
        double sum = 0.0;
        for (std::size_t i = end - frame; i < end; ++i) sum += static_cast<double>(note[i]) * static_cast<double>(note[i]);
        power.push_back(sum / static_cast<double>(frame));
        if (end < frame + hop) break;
    }
    std::reverse(power.begin(), power.end());
    const double peak_power = *std::max_element(power.begin(), power.end());
    double end_sum = 0.0;
    for (std::size_t i = note.size() - end_frames; i < note.size(); ++i) end_sum += static_cast<double>(note[i]) * static_cast<double>(note[i]);
    const double end_power = end_sum / static_cast<double>(end_frames);
    if (!(peak_power > 0.0)) return out;
    out.end_below_peak_db = end_power > 0.0 ? power_to_db(peak_power / end_power) : infinity;

    // Held stretch: frames back from the end whose level stays within the tolerance of the end's.
    const double end_db = power_to_db(std::max(end_power, 1e-30));
    std::size_t held_frames = 0;
    while (held_frames < power.size() &&
           std::abs(power_to_db(std::max(power[power.size() - 1 - held_frames], 1e-30)) - end_db) <=
               params.hold_tolerance_db)
        ++held_frames;
    out.held_s = held_frames == 0 ? 0.0 : (static_cast<double>(held_frames - 1) * static_cast<double>(hop) +
                                           static_cast<double>(frame)) / sample_rate_hz;
    if (out.end_below_peak_db < params.cut_within_db) {
        out.kind = out.held_s >= params.hold_min_s ? end_kind::holds : end_kind::cut;
    }
    return out;
}

}  // namespace wane

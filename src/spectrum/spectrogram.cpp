// A magnitude spectrogram of a whole recording (see spectrogram.hpp).
#include "spectrum/spectrogram.hpp"

#include <algorithm>
#include <cmath>
#include <cstdint>

#include "core/units.hpp"
#include "spectrum/stft.hpp"

namespace wane {

spectrogram_db make_spectrogram(std::span<const float> samples, double sample_rate_hz, double window_s,
                                int max_frames) {
    constexpr int zero_padding = 2;
    const int window_length = std::max(33, static_cast<int>(std::lround(window_s * sample_rate_hz)) | 1);
    stft_plan plan({.window = window_kind::blackman_harris_4, .window_length = window_length,
                    .fft_size = fast_fft_size(zero_padding * window_length)});
    const auto total = static_cast<std::int64_t>(samples.size());
    // At least window/8 apart: finer than that adds pixels but no detail.
    constexpr int min_hops_per_window = 8;
    const std::int64_t hop = std::max<std::int64_t>(window_length / min_hops_per_window,
                                                    (total + max_frames - 1) / std::max(1, max_frames));
    spectrogram_db s;
    s.bins = plan.fft_size() / 2 + 1;
    s.bin_hz = sample_rate_hz / plan.fft_size();
    s.hop_s = static_cast<double>(hop) / sample_rate_hz;
    s.start_s = 0.0;
    s.level_db.reserve(static_cast<std::size_t>((total + hop - 1) / hop) * static_cast<std::size_t>(s.bins));
    for (std::int64_t c = 0; c < total; c += hop) {
        plan.analyze(samples, c);
        for (float pw : plan.power()) {
            s.level_db.push_back(static_cast<float>(power_to_db(std::max(static_cast<double>(pw), spectrogram_power_floor))));
        }
        ++s.frames;
    }
    return s;
}

spectrogram_db stretch_spectrum(std::span<const float> x, double sample_rate_hz, std::size_t start_frames,
                                std::size_t length_frames) {
    constexpr int zero_padding = 2;
    const int window_length = std::max(33, static_cast<int>(length_frames) | 1);
    stft_plan plan({.window = window_kind::hann, .window_length = window_length,
                    .fft_size = fast_fft_size(zero_padding * window_length)});
    plan.analyze(x, static_cast<std::int64_t>(start_frames) + window_length / 2);
    spectrogram_db s{.frames = 1, .bins = plan.fft_size() / 2 + 1, .bin_hz = sample_rate_hz / plan.fft_size(),
                     .hop_s = static_cast<double>(window_length) / sample_rate_hz,
                     .start_s = static_cast<double>(start_frames) / sample_rate_hz + 0.5 * window_length / sample_rate_hz,
                     .level_db = {}};
    for (const float pw : plan.power()) {
        s.level_db.push_back(static_cast<float>(power_to_db(std::max(static_cast<double>(pw), spectrogram_power_floor))));
    }
    return s;
}

}  // namespace wane

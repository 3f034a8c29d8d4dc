// A magnitude spectrogram of a whole recording (for the report's picture): STFT levels in dB.
#pragma once

#include <cstddef>
#include <span>
#include <vector>

namespace wane {

/// Spectrogram power floor: -200 dB keeps log10 finite in digital silence.
inline constexpr double spectrogram_power_floor = 1e-20;
inline constexpr double spectrogram_floor_db = -200.0;

/// A magnitude spectrogram in dB: level_db[frame * bins + bin], bin k at k * bin_hz,
/// frame j centred at start_s + j * hop_s (seconds in the source file).
struct spectrogram_db {
    int frames = 0;
    int bins = 0;
    double bin_hz = 0.0;
    double hop_s = 0.0;
    double start_s = 0.0;
    std::vector<float> level_db;
};

/// Spectrogram of a whole recording for the report: Blackman-Harris window of window_s, at most
/// max_frames frames spread evenly over the file (levels in dBFS re a full-scale sinusoid).
spectrogram_db make_spectrogram(std::span<const float> samples, double sample_rate_hz, double window_s = 0.046,
                                int max_frames = 960);

/// Spectrum of one stretch x[start, start + length) (Hann window over the stretch, zero padded
/// to at least twice its length), as a spectrogram of one frame centred on the stretch's middle;
/// levels in dBFS re a full-scale sinusoid. Samples outside x read as 0.
spectrogram_db stretch_spectrum(std::span<const float> x, double sample_rate_hz, std::size_t start_frames,
                                std::size_t length_frames);

}  // namespace wane

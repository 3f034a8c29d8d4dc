// What the report embeds, encoded in memory: WAV (libsndfile virtual I/O), PNG (libpng), base64.
#pragma once

#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "spectrum/spectrogram.hpp"

namespace wane {

/// PNG bytes of a spectrogram (libpng), width = frames, height = bins up to max_freq_hz,
/// levels mapped from (peak - range_db) .. peak through the cubehelix colour scheme.
std::string spectrogram_png(const spectrogram_db& s, double max_freq_hz, double range_db);

/// PNG bytes (libpng) of 8-bit RGB pixels, row 0 at the top, width * height * 3 bytes.
std::string png_bytes(const std::vector<unsigned char>& pixels, int width, int height);

/// 16-bit PCM WAV bytes in memory (libsndfile virtual I/O), for embedding; peak-normalized
/// copies are not made: samples beyond full scale are scaled down to avoid clipping.
std::string wav_bytes(std::span<const float> samples, double sample_rate_hz);

/// RFC 4648 base64.
std::string base64_encode(std::string_view bytes);

}  // namespace wane

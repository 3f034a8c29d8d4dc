// Spectrogram pictures for the report: a level image on a linear or log frequency axis, and the
// difference of two spectrograms of the same frames on a diverging scale centred on 0 dB.
#pragma once

#include <string>

#include "spectrum/spectrogram.hpp"

namespace wane {

enum class freq_axis { linear, log };

struct image_size {
    int width = 900;   ///< pixels (frames are max-pooled into columns)
    int height = 360;  ///< pixels (bins are max-pooled into rows, or the nearest bin taken)
};

/// Row y (0 = top) of an image of `height` rows spans [row_low_hz(y), row_low_hz(y - 1)); the
/// axis runs from low_hz (bottom edge) to top_hz (top edge), linear or logarithmic.
double row_edge_hz(int edge_from_bottom, int height, double low_hz, double top_hz, freq_axis axis);

/// PNG of levels from (peak - range_db) .. peak (peak: the loudest level of s, at least
/// spectrogram_floor_db + range_db so silence stays white), through level_colour (cubehelix).
std::string level_png(const spectrogram_db& s, double low_hz, double top_hz, freq_axis axis, double range_db,
                      image_size size = {});

/// PNG of b - a per pixel (both max-pooled the same way, each floored at a's peak - range_db, so
/// where both are quieter the difference is 0), through diverging_colour over +-diff_range_db.
/// a and b must have the same frames and bins.
std::string difference_png(const spectrogram_db& a, const spectrogram_db& b, double low_hz, double top_hz,
                           freq_axis axis, double range_db, double diff_range_db, image_size size = {});

}  // namespace wane

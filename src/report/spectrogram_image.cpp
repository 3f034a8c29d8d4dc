// Spectrogram pictures for the report (see spectrogram_image.hpp).
#include "report/spectrogram_image.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <limits>
#include <vector>

#include "report/media.hpp"
#include "report/svg_plot.hpp"

namespace wane {

using report_plot::rgb;

double row_edge_hz(int edge_from_bottom, int height, double low_hz, double top_hz, freq_axis axis) {
    const double u = static_cast<double>(edge_from_bottom) / height;
    return axis == freq_axis::log ? low_hz * std::pow(top_hz / low_hz, u) : low_hz + u * (top_hz - low_hz);
}

namespace {

/// Max-pooled levels, row 0 at the top: each pixel the loudest (frame, bin) in its span; a row
/// narrower than a bin takes the bin nearest its centre.
std::vector<float> pooled_levels(const spectrogram_db& s, double low_hz, double top_hz, freq_axis axis,
                                 image_size size) {
    const int width = std::min(size.width, std::max(1, s.frames));
    std::vector<float> out(static_cast<std::size_t>(width) * static_cast<std::size_t>(size.height),
                           static_cast<float>(spectrogram_floor_db));
    for (int y = 0; y < size.height; ++y) {
        const int from_bottom = size.height - 1 - y;
        const double lo_hz = row_edge_hz(from_bottom, size.height, low_hz, top_hz, axis);
        const double hi_hz = row_edge_hz(from_bottom + 1, size.height, low_hz, top_hz, axis);
        int b0 = static_cast<int>(std::ceil(lo_hz / s.bin_hz)), b1 = static_cast<int>(std::ceil(hi_hz / s.bin_hz));
        if (b1 <= b0) b0 = static_cast<int>(std::lround(0.5 * (lo_hz + hi_hz) / s.bin_hz)), b1 = b0 + 1;
        b0 = std::clamp(b0, 0, s.bins - 1);
        b1 = std::clamp(b1, b0 + 1, s.bins);
        for (int x = 0; x < width; ++x) {
            const int f0 = x * s.frames / width, f1 = std::max(f0 + 1, (x + 1) * s.frames / width);
            float v = -std::numeric_limits<float>::infinity();
            for (int f = f0; f < f1; ++f) {
                const float* row = s.level_db.data() + static_cast<std::size_t>(f) * static_cast<std::size_t>(s.bins);
                v = std::max(v, *std::max_element(row + b0, row + b1));
            }
            out[static_cast<std::size_t>(y) * static_cast<std::size_t>(width) + static_cast<std::size_t>(x)] = v;
        }
    }
    return out;
}

float loudest(const spectrogram_db& s, double range_db) {
    float peak = static_cast<float>(spectrogram_floor_db + range_db);
    for (const float v : s.level_db) peak = std::max(peak, v);
    return peak;
}

std::string encode(const std::vector<rgb>& colours, int width, int height) {
    std::vector<unsigned char> pixels;
    pixels.reserve(colours.size() * 3);
    for (const rgb c : colours) pixels.insert(pixels.end(), {c.r, c.g, c.b});
    return png_bytes(pixels, width, height);
}

}  // namespace

std::string level_png(const spectrogram_db& s, double low_hz, double top_hz, freq_axis axis, double range_db,
                      image_size size) {
    assert(s.frames > 0 && s.bins > 0 && top_hz > low_hz);
    const std::vector<float> v = pooled_levels(s, low_hz, top_hz, axis, size);
    const double peak = static_cast<double>(loudest(s, range_db));
    std::vector<rgb> colours(v.size());
    for (std::size_t i = 0; i < v.size(); ++i) {
        colours[i] = report_plot::level_colour((static_cast<double>(v[i]) - (peak - range_db)) / range_db);
    }
    return encode(colours, static_cast<int>(v.size()) / size.height, size.height);
}

std::string difference_png(const spectrogram_db& a, const spectrogram_db& b, double low_hz, double top_hz,
                           freq_axis axis, double range_db, double diff_range_db, image_size size) {
    assert(a.frames == b.frames && a.bins == b.bins && top_hz > low_hz);
    const std::vector<float> va = pooled_levels(a, low_hz, top_hz, axis, size);
    const std::vector<float> vb = pooled_levels(b, low_hz, top_hz, axis, size);
    const double floor_db = static_cast<double>(loudest(a, range_db)) - range_db;
    std::vector<rgb> colours(va.size());
    for (std::size_t i = 0; i < va.size(); ++i) {
        const double d = std::max(static_cast<double>(vb[i]), floor_db) - std::max(static_cast<double>(va[i]), floor_db);
        colours[i] = report_plot::diverging_colour(d / diff_range_db);
    }
    return encode(colours, static_cast<int>(va.size()) / size.height, size.height);
}

}  // namespace wane

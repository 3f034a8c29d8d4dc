// What the report embeds (see media.hpp).
#include "report/media.hpp"

#include <png.h>
#include <sndfile.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <limits>
#include <vector>

#include "io/errors.hpp"
#include "report/svg_plot.hpp"

namespace wane {

using report_plot::level_colour;
using report_plot::rgb;

namespace {

// ---- encodings ----------------------------------------------------------------------------

struct memory_file {
    std::string bytes;
    sf_count_t pos = 0;
};

sf_count_t vio_length(void* user) { return static_cast<sf_count_t>(static_cast<memory_file*>(user)->bytes.size()); }
sf_count_t vio_seek(sf_count_t offset, int whence, void* user) {
    auto* f = static_cast<memory_file*>(user);
    const auto size = static_cast<sf_count_t>(f->bytes.size());
    sf_count_t base = 0;
    if (whence == SEEK_CUR) base = f->pos;
    if (whence == SEEK_END) base = size;
    f->pos = std::max<sf_count_t>(0, base + offset);
    return f->pos;
}
sf_count_t vio_read(void* ptr, sf_count_t count, void* user) {
    auto* f = static_cast<memory_file*>(user);
    const auto size = static_cast<sf_count_t>(f->bytes.size());
    const sf_count_t n = std::clamp<sf_count_t>(size - f->pos, 0, count);
    std::memcpy(ptr, f->bytes.data() + f->pos, static_cast<std::size_t>(n));
    f->pos += n;
    return n;
}
sf_count_t vio_write(const void* ptr, sf_count_t count, void* user) {
    auto* f = static_cast<memory_file*>(user);
    const auto end = static_cast<std::size_t>(f->pos + count);
    if (f->bytes.size() < end) f->bytes.resize(end);
    std::memcpy(f->bytes.data() + f->pos, ptr, static_cast<std::size_t>(count));
    f->pos += count;
    return count;
}
sf_count_t vio_tell(void* user) { return static_cast<memory_file*>(user)->pos; }

void png_append(png_structp png, png_bytep data, png_size_t length) {
    auto* out = static_cast<std::string*>(png_get_io_ptr(png));
    out->append(reinterpret_cast<const char*>(data), length);
}
void png_noop_flush(png_structp) {}

}  // namespace

std::string base64_encode(std::string_view bytes) {
    static constexpr char alphabet[] = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    std::string out;
    out.reserve((bytes.size() + 2) / 3 * 4);
    std::size_t i = 0;
    for (; i + 2 < bytes.size(); i += 3) {
        const auto v = (static_cast<unsigned>(static_cast<unsigned char>(bytes[i])) << 16) |
                       (static_cast<unsigned>(static_cast<unsigned char>(bytes[i + 1])) << 8) |
                       static_cast<unsigned>(static_cast<unsigned char>(bytes[i + 2]));
        out += alphabet[(v >> 18) & 63];
        out += alphabet[(v >> 12) & 63];
        out += alphabet[(v >> 6) & 63];
        out += alphabet[v & 63];
    }
    const std::size_t rest = bytes.size() - i;
    if (rest > 0) {
        unsigned v = static_cast<unsigned>(static_cast<unsigned char>(bytes[i])) << 16;
        if (rest == 2) v |= static_cast<unsigned>(static_cast<unsigned char>(bytes[i + 1])) << 8;
        out += alphabet[(v >> 18) & 63];
        out += alphabet[(v >> 12) & 63];
        out += rest == 2 ? alphabet[(v >> 6) & 63] : '=';
        out += '=';
    }
    return out;
}

std::string wav_bytes(std::span<const float> samples, double sample_rate_hz) {
    float peak = 0.0f;
    for (float s : samples) peak = std::max(peak, std::abs(s));
    const float scale = peak > 1.0f ? 1.0f / peak : 1.0f;
    memory_file file;
    SF_VIRTUAL_IO vio{vio_length, vio_seek, vio_read, vio_write, vio_tell};
    SF_INFO info{};
    info.samplerate = static_cast<int>(std::lround(sample_rate_hz));
    info.channels = 1;
    info.format = SF_FORMAT_WAV | SF_FORMAT_PCM_16;
    SNDFILE* snd = sf_open_virtual(&vio, SFM_WRITE, &info, &file);
    if (snd == nullptr) throw io_error(std::string("report: cannot encode audio: ") + sf_strerror(nullptr));
    std::vector<float> scaled(samples.begin(), samples.end());
    for (float& s : scaled) s *= scale;
    sf_write_float(snd, scaled.data(), static_cast<sf_count_t>(scaled.size()));
    sf_close(snd);
    return file.bytes;
}

std::string spectrogram_png(const spectrogram_db& s, double max_freq_hz, double range_db) {
    constexpr int max_width = 960, max_height = 400;
    const int used_bins = std::clamp(static_cast<int>(max_freq_hz / s.bin_hz), 1, s.bins);
    const int width = std::min(s.frames, max_width);
    const int height = std::min(used_bins, max_height);
    float peak = -std::numeric_limits<float>::infinity();
    for (float v : s.level_db) peak = std::max(peak, v);
    // Digital silence stays white: the scale's top is at least range_db above the floor.
    peak = std::max(peak, static_cast<float>(spectrogram_floor_db + range_db));
    // Max-pool frames and bins into pixels; row 0 is the top (highest frequency).
    std::vector<unsigned char> pixels(static_cast<std::size_t>(width) * static_cast<std::size_t>(height) * 3);
    for (int x = 0; x < width; ++x) {
        const int f0 = x * s.frames / width, f1 = std::max(f0 + 1, (x + 1) * s.frames / width);
        for (int y = 0; y < height; ++y) {
            const int row_from_bottom = height - 1 - y;
            const int b0 = row_from_bottom * used_bins / height;
            const int b1 = std::max(b0 + 1, (row_from_bottom + 1) * used_bins / height);
            float v = -std::numeric_limits<float>::infinity();
            for (int f = f0; f < f1; ++f) {
                for (int b = b0; b < b1; ++b) v = std::max(v, s.level_db[static_cast<std::size_t>(f) * static_cast<std::size_t>(s.bins) + static_cast<std::size_t>(b)]);
            }
            const rgb c = level_colour((static_cast<double>(v) - (static_cast<double>(peak) - range_db)) / range_db);
            const std::size_t at = (static_cast<std::size_t>(y) * static_cast<std::size_t>(width) + static_cast<std::size_t>(x)) * 3;
            pixels[at] = c.r;
            pixels[at + 1] = c.g;
            pixels[at + 2] = c.b;
        }
    }
    return png_bytes(pixels, width, height);
}

std::string png_bytes(const std::vector<unsigned char>& pixels, int width, int height) {
    std::string out;
    png_structp png = png_create_write_struct(PNG_LIBPNG_VER_STRING, nullptr, nullptr, nullptr);
    png_infop info = png ? png_create_info_struct(png) : nullptr;
    if (png == nullptr || info == nullptr) throw io_error("report: libpng could not start");
    if (setjmp(png_jmpbuf(png))) {
        png_destroy_write_struct(&png, &info);
        throw io_error("report: libpng failed to encode an image");
    }
    png_set_write_fn(png, &out, png_append, png_noop_flush);
    png_set_IHDR(png, info, static_cast<png_uint_32>(width), static_cast<png_uint_32>(height), 8, PNG_COLOR_TYPE_RGB,
                 PNG_INTERLACE_NONE, PNG_COMPRESSION_TYPE_DEFAULT, PNG_FILTER_TYPE_DEFAULT);
    png_write_info(png, info);
    for (int y = 0; y < height; ++y) {
        png_write_row(png, pixels.data() + static_cast<std::size_t>(y) * static_cast<std::size_t>(width) * 3);
    }
    png_write_end(png, nullptr);
    png_destroy_write_struct(&png, &info);
    return out;
}

}  // namespace wane

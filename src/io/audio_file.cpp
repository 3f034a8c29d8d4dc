// Audio files at the edge: reading (libsndfile) and rate changes (libsamplerate). Writing is in
// audio_write.cpp, the container checks in audio_container.cpp.
#include "io/audio_file.hpp"

#include <sndfile.h>
#include <samplerate.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <limits>
#include <string>
#include <system_error>

#include "core/text_format.hpp"
#include "core/units.hpp"
#include "io/audio_container.hpp"
#include "io/errors.hpp"
#include "io/sndfile_common.hpp"

namespace wane {

namespace fs = std::filesystem;
using namespace sndfile_common;

std::string sndfile_common::format_name_of(int format) {
    std::string name;
    SF_FORMAT_INFO major{};
    major.format = format & SF_FORMAT_TYPEMASK;
    if (sf_command(nullptr, SFC_GET_FORMAT_INFO, &major, sizeof major) == 0 && major.name != nullptr) {
        name = major.name;
    }
    SF_FORMAT_INFO sub{};
    sub.format = format & SF_FORMAT_SUBMASK;
    if (sf_command(nullptr, SFC_GET_FORMAT_INFO, &sub, sizeof sub) == 0 && sub.name != nullptr) {
        if (!name.empty()) name += " / ";
        name += sub.name;
    }
    return name;
}

namespace {

/// A byte count for messages: "2 GiB (2147483648 bytes)", or just the bytes below 1 MiB.
std::string bytes_text(std::uintmax_t bytes) {
    constexpr std::uintmax_t mib = std::uintmax_t{1} << 20;
    constexpr double bytes_per_gib = 1073741824.0;
    if (bytes >= (mib << 10)) return printf_text("%.4g GiB (%ju bytes)", static_cast<double>(bytes) / bytes_per_gib, bytes);
    if (bytes >= mib) return printf_text("%.4g MiB (%ju bytes)", static_cast<double>(bytes) / static_cast<double>(mib), bytes);
    return printf_text("%ju bytes", bytes);
}

/// The checks before libsndfile opens the file: it exists, is no directory, is not empty and not
/// over the size limit. Returns its size in bytes.
std::uintmax_t check_input_file(const fs::path& path, const audio_read_options& options) {
    std::error_code ec;
    const fs::file_status st = fs::status(path, ec);
    if (ec || !fs::exists(st)) throw io_error(path_text(path) + ": no such file");
    if (fs::is_directory(st)) throw io_error(path_text(path) + ": is a directory, not an audio file");
    const std::uintmax_t file_size = fs::file_size(path, ec);
    if (ec) throw io_error(path_text(path) + ": cannot read: " + ec.message());
    if (file_size == 0) throw io_error(path_text(path) + ": empty file (0 bytes)");
    if (file_size > options.max_file_bytes) {
        throw io_error(path_text(path) + ": " + std::to_string(file_size) + " bytes, larger than the " +
                       bytes_text(options.max_file_bytes) + " limit on input files (raise it with --max-input-mib)");
    }
    return file_size;
}

/// The checks of an opened file's header: channels, rate, --channel, the container (after
/// libsndfile's own reason), frames and the length limit.
void check_header(const fs::path& path, const SF_INFO& info, const audio_read_options& options,
                  std::uintmax_t file_size) {
    if (info.channels <= 0) throw io_error(path_text(path) + ": header gives no channels");
    const double rate_hz = static_cast<double>(info.samplerate);
    if (!(rate_hz >= min_file_rate_hz && rate_hz <= max_file_rate_hz)) {
        throw io_error(path_text(path) + ": sample rate " + std::to_string(info.samplerate) +
                       " Hz is outside 1 Hz..768 kHz (corrupt header?)");
    }
    if (options.channel) {
        const int ch = *options.channel;
        if (ch < 1 || ch > info.channels) {
            throw io_error(path_text(path) + ": --channel " + std::to_string(ch) + " but file has " +
                           std::to_string(info.channels) + (info.channels == 1 ? " channel" : " channels"));
        }
    }
    check_container(path, file_size, container_check_stage::after_open);
    if (info.frames <= 0) throw io_error(path_text(path) + ": no audio frames (zero length)");
    const double claimed_s = static_cast<double>(info.frames) / rate_hz;
    if (claimed_s > options.max_length_s) {
        throw io_error(path_text(path) + printf_text(": %.4g s long, longer than the %g s limit on input length "
                                                     "(raise it with --max-input-s)",
                                                     claimed_s, options.max_length_s));
    }
}

/// Reads info.frames frames block by block into out.samples (the channel picked, or the mean of
/// all), refusing NaN/Inf samples and fewer frames than the header claims.
void read_frames(SNDFILE* file, const SF_INFO& info, const audio_read_options& options, const fs::path& path,
                 mono_audio& out) {
    const auto total_frames = static_cast<std::size_t>(info.frames);
    const auto channels = static_cast<std::size_t>(info.channels);
    const std::size_t pick = options.channel ? static_cast<std::size_t>(*options.channel - 1) : 0;
    const double inv_channels = 1.0 / static_cast<double>(channels);
    const sf_count_t block_frames = std::max<sf_count_t>(1, io_block_frames / info.channels);
    std::vector<float> block(static_cast<std::size_t>(block_frames) * channels);
    std::size_t frames_done = 0;
    while (frames_done < total_frames) {
        const sf_count_t want =
            std::min<sf_count_t>(block_frames, static_cast<sf_count_t>(total_frames - frames_done));
        const sf_count_t got = sf_readf_float(file, block.data(), want);
        if (got <= 0) break;
        const auto got_frames = static_cast<std::size_t>(got);
        for (std::size_t i = 0; i < got_frames * channels; ++i) {
            if (!std::isfinite(block[i])) {
                const std::size_t frame = frames_done + i / channels;
                throw io_error(path_text(path) + ": " + (std::isnan(block[i]) ? "NaN" : "infinite") +
                               " sample at frame " + std::to_string(frame) + " (channel " +
                               std::to_string(i % channels + 1) + ")");
            }
        }
        if (!out.channels.empty()) {
            for (std::size_t c = 0; c < channels; ++c)
                for (std::size_t f = 0; f < got_frames; ++f) out.channels[c].push_back(block[f * channels + c]);
        }
        if (options.channel || channels == 1) {
            for (std::size_t f = 0; f < got_frames; ++f) out.samples.push_back(block[f * channels + pick]);
        } else {
            for (std::size_t f = 0; f < got_frames; ++f) {
                double sum = 0.0;
                for (std::size_t c = 0; c < channels; ++c) sum += static_cast<double>(block[f * channels + c]);
                out.samples.push_back(static_cast<float>(sum * inv_channels));
            }
        }
        frames_done += got_frames;
    }
    if (frames_done < total_frames) {
        const int err = sf_error(file);
        throw io_error(path_text(path) + ": truncated or damaged: decoded " + std::to_string(frames_done) + " of the " +
                       std::to_string(total_frames) + " frames the header claims" +
                       (err != 0 ? std::string(" (") + sf_strerror(file) + ")" : std::string()));
    }
}

}  // namespace

mono_audio read_audio(const fs::path& path, const audio_read_options& options) {
    const std::uintmax_t file_size = check_input_file(path, options);
    check_container(path, file_size, container_check_stage::before_open);
    SF_INFO info{};
    sndfile_handle file(sf_open(path.c_str(), SFM_READ, &info));
    if (file.get() == nullptr) {
        throw io_error(path_text(path) + ": not a readable audio file: " + sf_strerror(nullptr));
    }
    check_header(path, info, options, file_size);

    mono_audio out;
    out.sample_rate_hz = static_cast<double>(info.samplerate);
    out.source_channels = info.channels;
    out.format_name = format_name_of(info.format);

    // A header may lie about its length: reserve no more than the file could hold at one byte
    // per frame; the vector grows if a compressed format really decodes to more.
    const auto total_frames = static_cast<std::size_t>(info.frames);
    out.samples.reserve(std::min<std::size_t>(total_frames, static_cast<std::size_t>(file_size)));
    if (options.keep_stereo && !options.channel && info.channels == 2) out.channels.resize(2);
    read_frames(file.get(), info, options, path, out);
    return out;
}

std::optional<int> read_root_midi(const fs::path& path) {
    std::error_code ec;
    if (!fs::is_regular_file(path, ec)) throw io_error(path_text(path) + ": no such file");
    SF_INFO info{};
    sndfile_handle file(sf_open(path.c_str(), SFM_READ, &info));
    if (file.get() == nullptr) {
        throw io_error(path_text(path) + ": not a readable audio file: " + sf_strerror(nullptr));
    }
    SF_INSTRUMENT inst{};
    if (sf_command(file.get(), SFC_GET_INSTRUMENT, &inst, sizeof inst) != SF_TRUE) return std::nullopt;
    return static_cast<int>(inst.basenote);
}

std::vector<float> resample(std::span<const float> samples, double from_rate_hz, double to_rate_hz) {
    if (!(from_rate_hz > 0.0) || !(to_rate_hz > 0.0)) {
        throw std::invalid_argument("resample: rates must be positive");
    }
    if (from_rate_hz == to_rate_hz || samples.empty()) return {samples.begin(), samples.end()};
    const double ratio = to_rate_hz / from_rate_hz;
    if (src_is_valid_ratio(ratio) == 0) {
        throw std::invalid_argument("resample: ratio " + std::to_string(ratio) +
                                    " is outside libsamplerate's range (1/256..256)");
    }
    // Output length round(n * ratio); libsamplerate may deliver a frame or so less at the end,
    // so the buffer has room for a few extra and the result is padded/cut to the exact length.
    const auto out_len = static_cast<std::size_t>(std::llround(static_cast<double>(samples.size()) * ratio));
    constexpr std::size_t spare_frames = 16;
    std::vector<float> out(out_len + spare_frames, 0.0f);
    SRC_DATA data{};
    data.data_in = samples.data();
    data.input_frames = static_cast<long>(samples.size());
    data.data_out = out.data();
    data.output_frames = static_cast<long>(out.size());
    data.src_ratio = ratio;
    const int err = src_simple(&data, SRC_SINC_BEST_QUALITY, 1);
    if (err != 0) throw std::runtime_error(std::string("resample: libsamplerate: ") + src_strerror(err));
    out.resize(out_len);
    const auto gen = static_cast<std::size_t>(data.output_frames_gen);
    if (gen < out_len) std::fill(out.begin() + static_cast<std::ptrdiff_t>(gen), out.end(), 0.0f);
    return out;
}

}  // namespace wane

// Writing audio files (libsndfile): 16-bit with TPDF dither, 24-bit, 32-bit float; the root note
// in the instrument chunk; atomic.
#include "core/text_format.hpp"
#include "io/audio_file.hpp"

#include <sndfile.h>

#include <algorithm>
#include <array>
#include <cctype>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <stdexcept>
#include <string>
#include <system_error>

#include "core/rng.hpp"
#include "core/units.hpp"
#include "io/atomic_file.hpp"
#include "io/errors.hpp"
#include "io/sndfile_common.hpp"

namespace wane {

namespace fs = std::filesystem;
using namespace sndfile_common;

namespace {

/// 20 log10(peak), for messages.
std::string peak_dbfs_text(double peak) { return printf_text("%+.2f dBFS", to_level(amp_lin{peak}).db); }

/// xorshift64* (Vigna 2016, "An experimental exploration of Marsaglia's xorshift generators,
/// scrambled", from memory), seeded through splitmix64 so any seed (also 0) gives a good state.
class dither_rng {
public:
    explicit dither_rng(std::uint64_t seed) {
        state_ = splitmix64{seed}.next();
        if (state_ == 0) state_ = 1;
    }
    /// Uniform in [-0.5, 0.5) with 2^-53 resolution.
    double uniform_half() {
        state_ ^= state_ >> 12;
        state_ ^= state_ << 25;
        state_ ^= state_ >> 27;
        const std::uint64_t r = state_ * 0x2545F4914F6CDD1Dull;
        constexpr double two_pow_minus_53 = 1.0 / 9007199254740992.0;
        return static_cast<double>(r >> 11) * two_pow_minus_53 - 0.5;
    }

private:
    std::uint64_t state_ = 1;
};

struct container {
    int major = 0;  ///< libsndfile's SF_FORMAT_* container
};

container container_for(const fs::path& path) {
    std::string ext = path.extension().string();
    std::transform(ext.begin(), ext.end(), ext.begin(), [](unsigned char c) { return static_cast<char>(std::tolower(c)); });
    if (ext == ".wav") return {SF_FORMAT_WAV};
    if (ext == ".aif" || ext == ".aiff") return {SF_FORMAT_AIFF};
    if (ext == ".flac") return {SF_FORMAT_FLAC};
    throw io_error(path_text(path) + ": unsupported output extension '" + path.extension().string() +
                   "' (use .wav, .aif, .aiff or .flac)");
}

/// Appends an AIFF INST chunk holding the root note to a finished AIFF file and fixes the FORM
/// size. Layout (Apple, "Audio Interchange File Format: AIFF", version 1.3, 1989, from memory): ckID 'INST',
/// ckSize 20, then baseNote, detune, lowNote, highNote, lowVelocity, highVelocity (one byte
/// each), gain (int16 dB), sustainLoop and releaseLoop (playMode, beginLoop, endLoop: int16 each;
/// playMode 0 = no looping). Chunks start on even offsets, so an odd file gets a pad byte first.
void append_aiff_inst_chunk(const fs::path& file, const fs::path& dest, int root_midi) {
    constexpr std::uint32_t inst_chunk_size = 20;
    constexpr unsigned char full_range_top = 127;
    std::error_code ec;
    std::uintmax_t size = fs::file_size(file, ec);
    if (ec) throw io_error(path_text(dest) + ": cannot store the root note: " + ec.message());
    std::string bytes;
    if (size % 2 != 0) bytes.push_back('\0');
    bytes += "INST";
    for (int shift = 24; shift >= 0; shift -= 8) bytes.push_back(static_cast<char>((inst_chunk_size >> shift) & 0xFF));
    bytes.push_back(static_cast<char>(root_midi));  // baseNote
    bytes.push_back('\0');                          // detune (cents)
    bytes.push_back('\0');                          // lowNote
    bytes.push_back(static_cast<char>(full_range_top));  // highNote
    bytes.push_back(1);                                  // lowVelocity
    bytes.push_back(static_cast<char>(full_range_top));  // highVelocity
    bytes.append(2 + 6 + 6, '\0');                      // gain 0 dB, two loops of playMode 0
    size += bytes.size();
    const auto form_size = static_cast<std::uint32_t>(size - 8);  // FORM size excludes its 8-byte header
    const std::array<char, 4> form_be = {static_cast<char>(form_size >> 24), static_cast<char>((form_size >> 16) & 0xFF),
                                         static_cast<char>((form_size >> 8) & 0xFF), static_cast<char>(form_size & 0xFF)};
    std::fstream f(file, std::ios::binary | std::ios::in | std::ios::out);
    f.seekp(0, std::ios::end);
    f.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
    f.seekp(4);
    f.write(form_be.data(), form_be.size());
    f.flush();
    if (!f) throw io_error(path_text(dest) + ": write failed while storing the root note");
}

}  // namespace

namespace {

/// Refuses what cannot be written before any file is made: a format the container lacks, a rate
/// that is not a whole number in range, no samples, a root note outside MIDI, a NaN/Inf sample,
/// and a peak above full scale (the last guard against silent clipping: callers normalize or
/// scale before this).
void check_write_request(const fs::path& path, std::span<const float> samples, double sample_rate_hz,
                         const audio_write_options& options, const container& cont) {
    if (options.format == sample_format::float32 && cont.major == SF_FORMAT_FLAC) {
        throw io_error(path_text(path) + ": FLAC has no 32-bit float format (use 16 or 24 bits, or .wav/.aiff)");
    }
    if (!(sample_rate_hz >= min_file_rate_hz && sample_rate_hz <= max_file_rate_hz) ||
        sample_rate_hz != std::round(sample_rate_hz)) {
        throw io_error(path_text(path) + ": cannot write at sample rate " + printf_text("%.10g", sample_rate_hz) +
                       " Hz (needs a whole number in 1 Hz..768 kHz)");
    }
    if (samples.empty()) throw io_error(path_text(path) + ": no samples to write");
    if (options.channels < 1 || samples.size() % static_cast<std::size_t>(options.channels) != 0) {
        throw io_error(path_text(path) + ": " + std::to_string(samples.size()) + " samples are not whole frames of " +
                       std::to_string(options.channels) + " channels");
    }
    if (options.root_midi && (*options.root_midi < 0 || *options.root_midi > 127)) {
        throw io_error(path_text(path) + ": root MIDI note " + std::to_string(*options.root_midi) +
                       " is outside 0..127");
    }
    double peak = 0.0;
    for (std::size_t i = 0; i < samples.size(); ++i) {
        const float s = samples[i];
        if (!std::isfinite(s)) {
            throw io_error(path_text(path) + ": refusing to write a " + (std::isnan(s) ? "NaN" : "infinite") +
                           " sample at frame " + std::to_string(i / static_cast<std::size_t>(options.channels)));
        }
        peak = std::max(peak, std::fabs(static_cast<double>(s)));
    }
    if (peak > 1.0) {
        throw io_error(path_text(path) + ": peak " + peak_dbfs_text(peak) +
                       " exceeds full scale; refusing to clip (scale the signal down first)");
    }
}

/// Stores the root note in the instrument chunk. WAV: libsndfile writes the smpl chunk. AIFF:
/// libsndfile (1.2) accepts the instrument but writes no INST chunk, so write_audio appends one
/// after closing (append_aiff_inst_chunk). FLAC has no instrument chunk; nothing is stored.
void store_root_note(SNDFILE* file, const container& cont, int root_midi, const fs::path& path) {
    SF_INSTRUMENT inst{};
    inst.basenote = static_cast<char>(root_midi);
    inst.velocity_lo = 0;
    inst.velocity_hi = 127;
    inst.key_lo = 0;
    inst.key_hi = 127;
    if (cont.major == SF_FORMAT_WAV && sf_command(file, SFC_SET_INSTRUMENT, &inst, sizeof inst) != SF_TRUE) {
        throw io_error(path_text(path) + ": cannot store the root note: " + sf_strerror(file));
    }
}

/// Writes samples in blocks of io_block_frames: quantize(x) gives the value sf_write (libsndfile's
/// sf_write_short / sf_write_int) takes for sample x. Throws naming path on a short write.
template <class Value, class Quantize, class Write>
void write_blocks(SNDFILE* file, std::span<const float> samples, const fs::path& path, Quantize&& quantize,
                  Write sf_write, int channels) {
    const std::size_t n = samples.size();
    const auto block_len = static_cast<std::size_t>(io_block_frames) * static_cast<std::size_t>(channels);
    std::vector<Value> block(block_len);
    for (std::size_t start = 0; start < n; start += block_len) {
        const std::size_t len = std::min(block_len, n - start);
        for (std::size_t i = 0; i < len; ++i) block[i] = quantize(samples[start + i]);
        if (sf_write(file, block.data(), static_cast<sf_count_t>(len)) != static_cast<sf_count_t>(len)) {
            throw io_error(path_text(path) + ": write failed: " + sf_strerror(file));
        }
    }
}

void write_samples(SNDFILE* file, std::span<const float> samples, const audio_write_options& options,
                   const fs::path& path) {
    if (options.format == sample_format::float32) {
        write_blocks<float>(file, samples, path, [](float x) { return x; }, sf_write_float, options.channels);
    } else if (options.format == sample_format::pcm16) {
        // TPDF dither: the sum of two independent uniform values of +-0.5 LSB each, added before
        // rounding (Lipshitz, Wannamaker, Vanderkooy 1992, J. AES 40(5): renders the first two
        // moments of the total error independent of the signal). Clamping to the integer range
        // acts only within a step of full scale: +1.0 maps to 32768, one past the top, 32767,
        // and dither may push -1.0 one step below -32768.
        dither_rng rng(options.dither_seed);
        constexpr double lo = -pcm16_full_scale;
        constexpr double hi = pcm16_full_scale - 1.0;
        write_blocks<short>(file, samples, path, [&](float x) {
            double v = static_cast<double>(x) * pcm16_full_scale;
            if (options.dither) v += rng.uniform_half() + rng.uniform_half();
            return static_cast<short>(std::clamp(std::nearbyint(v), lo, hi));
        }, sf_write_short, options.channels);
    } else {
        // 24-bit: round to the nearest step, no dither (a float's 24-bit mantissa lands exactly).
        write_blocks<int>(file, samples, path, [](float x) {
            constexpr double lo = -pcm24_full_scale;
            constexpr double hi = pcm24_full_scale - 1.0;
            const double v = static_cast<double>(x) * pcm24_full_scale;
            const auto q = static_cast<int>(std::clamp(std::nearbyint(v), lo, hi));
            return static_cast<int>(static_cast<unsigned>(q) << pcm24_in_int_shift);
        }, sf_write_int, options.channels);
    }
}

}  // namespace

void write_audio(const fs::path& path, std::span<const float> samples, double sample_rate_hz,
                 const audio_write_options& options) {
    const container cont = container_for(path);
    check_write_request(path, samples, sample_rate_hz, options, cont);

    SF_INFO info{};
    info.samplerate = static_cast<int>(sample_rate_hz);
    info.channels = options.channels;
    switch (options.format) {
        case sample_format::pcm16: info.format = cont.major | SF_FORMAT_PCM_16; break;
        case sample_format::pcm24: info.format = cont.major | SF_FORMAT_PCM_24; break;
        case sample_format::float32: info.format = cont.major | SF_FORMAT_FLOAT; break;
    }
    if (sf_format_check(&info) == 0) {
        throw io_error(path_text(path) + ": libsndfile cannot write " + format_name_of(info.format));
    }

    atomic_output out(path);  // declared before the handle: the handle closes before the temp is removed
    // Through the temporary's descriptor: the path is never created again (see atomic_output).
    sndfile_handle file(sf_open_fd(out.fd(), SFM_WRITE, &info, SF_FALSE));
    if (file.get() == nullptr) {
        throw io_error(path_text(path) + ": cannot write: " + sf_strerror(nullptr));
    }
    // No PEAK chunk in float files: libsndfile stamps it with the wall-clock time, so the same
    // render would give different bytes from one second to the next (the chunk is optional).
    sf_command(file.get(), SFC_SET_ADD_PEAK_CHUNK, nullptr, SF_FALSE);
    if (options.root_midi) store_root_note(file.get(), cont, *options.root_midi, path);
    write_samples(file.get(), samples, options, path);
    if (file.close() != 0) throw io_error(path_text(path) + ": write failed while closing the file");
    if (options.root_midi && cont.major == SF_FORMAT_AIFF) {
        append_aiff_inst_chunk(out.temp_path(), path, *options.root_midi);
    }
    out.commit();
}

std::vector<float> interleave(std::span<const std::vector<float>> channels) {
    if (channels.empty()) return {};
    const std::size_t frames = channels[0].size();
    std::vector<float> out(frames * channels.size());
    for (std::size_t c = 0; c < channels.size(); ++c) {
        if (channels[c].size() != frames) throw std::invalid_argument("interleave: channels of different lengths");
        for (std::size_t f = 0; f < frames; ++f) out[f * channels.size() + c] = channels[c][f];
    }
    return out;
}

std::optional<sample_format> parse_sample_format(std::string_view text) {
    if (text == "16") return sample_format::pcm16;
    if (text == "24") return sample_format::pcm24;
    if (text == "32f") return sample_format::float32;
    return std::nullopt;
}

}  // namespace wane

// Audio files at the edge (libsndfile, libsamplerate). Everything the core sees is mono float
// samples in [-1, 1] plus a sample rate.
#pragma once

#include <cstdint>
#include <filesystem>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

namespace wane {

/// Input limits (common practice, no source: 30 minutes is far longer than any single note, and
/// 2 GiB is the largest size a plain RIFF WAV can describe with signed 32-bit sizes).
inline constexpr double default_max_input_s = 1800.0;
inline constexpr std::uintmax_t default_max_input_bytes = std::uintmax_t{2} << 30;

struct audio_read_options {
    /// 1-based channel to take; empty mixes all channels to mono (mean).
    std::optional<int> channel{};
    /// With no channel picked, also keep a two-channel file's channels apart (mono_audio::channels).
    bool keep_stereo = false;
    /// Longest input accepted, in seconds (refused with the limit named beyond it; the CLI
    /// option that raises it is --max-input-s).
    double max_length_s = default_max_input_s;
    /// Largest input file accepted, in bytes, checked before libsndfile opens it (refused with the
    /// limit named beyond it; the CLI option that raises it is --max-input-mib).
    std::uintmax_t max_file_bytes = default_max_input_bytes;
};

struct mono_audio {
    /// Integer PCM reads into [-1, 1) (v / 2^(bits-1)); float files are passed on unchanged and
    /// may exceed full scale.
    std::vector<float> samples;
    double sample_rate_hz = 0.0;
    int source_channels = 0;
    /// Left and right of a two-channel file when keep_stereo asked for them (samples is then their
    /// mean); empty otherwise.
    std::vector<std::vector<float>> channels;
    std::string format_name;  ///< e.g. "WAV (Microsoft) / Signed 24 bit PCM"
};

/// Reads any file libsndfile reads. Throws io_error naming the file: missing, a directory, larger
/// than max_file_bytes, not audio (libsndfile's message passed on), zero frames or channels,
/// NaN/Inf samples, rate outside 1 Hz..768 kHz, --channel beyond the channel count, longer than
/// max_length_s, and damaged containers: a RIFF/FORM header or a data/SSND chunk claiming more
/// bytes than the file holds, an AIFF COMM chunk claiming more frames than its SSND chunk holds,
/// an Ogg stream whose pages do not chain to the end of the file with valid checksums and an
/// end-of-stream mark, fewer frames decoded than the header claims.
mono_audio read_audio(const std::filesystem::path& path, const audio_read_options& options = {});

enum class sample_format { pcm16, pcm24, float32 };

struct audio_write_options {
    sample_format format = sample_format::pcm24;
    /// MIDI root note stored in the file's instrument chunk (WAV/AIFF), when set.
    std::optional<int> root_midi{};
    /// Seed of the TPDF dither applied when writing 16-bit PCM (deterministic output).
    std::uint64_t dither_seed = 0x77616e65;
    /// TPDF dither for 16-bit PCM (on by default). Off rounds to the nearest step, so samples
    /// already on the 16-bit grid come back bit-exact.
    bool dither = true;
    /// Samples per frame in the span given to write_audio (interleaved: left, right, left, ...).
    int channels = 1;
};

/// Interleaves equal-length channels into frames (left, right, left, ...) for write_audio.
std::vector<float> interleave(std::span<const std::vector<float>> channels);

/// Writes mono samples (or, with channels > 1, frames of interleaved samples); the container follows the extension (.wav, .aif/.aiff, .flac). Atomic.
/// Samples beyond full scale are the caller's business: check the peak first (never clip silently);
/// as the last guard, a peak above 1.0 (or a NaN/Inf sample) throws io_error stating the peak in
/// dBFS and writes nothing. Scaling follows libsndfile's: 16-bit v = x * 2^15, 24-bit v = x * 2^23
/// (x = +1.0 lands on the top step, 2^15 - 1 resp. 2^23 - 1). The root note is stored for WAV and
/// AIFF only (FLAC has no instrument chunk).
void write_audio(const std::filesystem::path& path, std::span<const float> samples,
                 double sample_rate_hz, const audio_write_options& options = {});

/// The root note of a file's instrument chunk (WAV smpl / AIFF INST), if it has one. Throws
/// io_error naming the file when it cannot be opened.
std::optional<int> read_root_midi(const std::filesystem::path& path);

/// Best-quality sinc resampling (libsamplerate SRC_SINC_BEST_QUALITY). Returns the input
/// unchanged when the rates are equal. The output has round(n * to / from) samples.
std::vector<float> resample(std::span<const float> samples, double from_rate_hz, double to_rate_hz);

/// Parses "16", "24", "32f" (the --bits option). Empty for anything else.
std::optional<sample_format> parse_sample_format(std::string_view text);

}  // namespace wane

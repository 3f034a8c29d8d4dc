// What the audio reader and writer share (internal to src/io): rate limits, block size, PCM
// scales, the SNDFILE owner, format names.
#pragma once

#include <sndfile.h>

#include <filesystem>
#include <string>

namespace wane::sndfile_common {

namespace fs = std::filesystem;

/// Sample rates of the audio files read and written (inclusive; the patch format's own bound on
/// source.sample_rate_hz is patch_rules::max_sample_rate_hz). 768 kHz is the highest rate in common use (common practice,
/// no single source); anything outside is a corrupt or hostile header.
inline constexpr double min_file_rate_hz = 1.0;
inline constexpr double max_file_rate_hz = 768000.0;
/// Frames per block when writing mono, and samples per block when reading (any channel count):
/// bounded memory per call.
inline constexpr sf_count_t io_block_frames = 65536;
/// Full-scale integer magnitudes of the PCM grids, matching libsndfile's float normalization
/// (a 16-bit value v reads as v / 2^15, a 24-bit value as v / 2^23).
inline constexpr double pcm16_full_scale = 32768.0;
inline constexpr double pcm24_full_scale = 8388608.0;
/// libsndfile's int interface carries 24-bit values in the top 24 bits of a 32-bit int.
inline constexpr int pcm24_in_int_shift = 8;

/// How a path appears in messages.
inline std::string path_text(const fs::path& path) { return path.string(); }

/// Owns a SNDFILE* (sf_close in the destructor).
class sndfile_handle {
public:
    sndfile_handle() = default;
    explicit sndfile_handle(SNDFILE* f) : f_(f) {}
    ~sndfile_handle() {
        if (f_ != nullptr) sf_close(f_);
    }
    sndfile_handle(const sndfile_handle&) = delete;
    sndfile_handle& operator=(const sndfile_handle&) = delete;
    SNDFILE* get() const { return f_; }
    /// Closes now; returns libsndfile's error code (0 on success).
    int close() {
        const int rc = f_ != nullptr ? sf_close(f_) : 0;
        f_ = nullptr;
        return rc;
    }

private:
    SNDFILE* f_ = nullptr;
};

/// "WAV (Microsoft) / Signed 24 bit PCM": libsndfile's names of the container and the encoding.
std::string format_name_of(int format);

}  // namespace wane::sndfile_common

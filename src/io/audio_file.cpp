// Audio files at the edge: libsndfile for reading and writing, libsamplerate for rate changes.
#include "io/audio_file.hpp"

#include <sndfile.h>
#include <samplerate.h>

#include <algorithm>
#include <array>
#include <cctype>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <fstream>
#include <limits>
#include <string>
#include <system_error>

#include "core/units.hpp"
#include "io/atomic_file.hpp"
#include "io/errors.hpp"

namespace wane {

namespace fs = std::filesystem;

namespace {

/// Accepted sample rates (inclusive). 768 kHz is the highest rate in common use (common practice,
/// no single source); anything outside is a corrupt or hostile header.
constexpr double min_sample_rate_hz = 1.0;
constexpr double max_sample_rate_hz = 768000.0;
/// Frames per block when writing mono, and samples per block when reading (any channel count):
/// bounded memory per call.
constexpr sf_count_t io_block_frames = 65536;
/// Full-scale integer magnitudes of the PCM grids, matching libsndfile's float normalization
/// (a 16-bit value v reads as v / 2^15, a 24-bit value as v / 2^23).
constexpr double pcm16_full_scale = 32768.0;
constexpr double pcm24_full_scale = 8388608.0;
/// libsndfile's int interface carries 24-bit values in the top 24 bits of a 32-bit int.
constexpr int pcm24_in_int_shift = 8;
/// RIFF/AIFF chunk sizes that mean "length unknown" (streamed writers, RF64): not checked.
constexpr std::uint32_t chunk_size_unknown = 0xFFFFFFFFu;
/// How many chunks to walk when looking for the data chunk (a bound against looping headers).
constexpr int max_chunks_scanned = 4096;

/// How a path appears in messages.
std::string path_text(const fs::path& path) { return path.string(); }

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

std::string format_name_of(int format) {
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

std::uint32_t read_u32_le(const unsigned char* p) {
    return static_cast<std::uint32_t>(p[0]) | (static_cast<std::uint32_t>(p[1]) << 8) |
           (static_cast<std::uint32_t>(p[2]) << 16) | (static_cast<std::uint32_t>(p[3]) << 24);
}
std::uint32_t read_u32_be(const unsigned char* p) {
    return (static_cast<std::uint32_t>(p[0]) << 24) | (static_cast<std::uint32_t>(p[1]) << 16) |
           (static_cast<std::uint32_t>(p[2]) << 8) | static_cast<std::uint32_t>(p[3]);
}

std::uint16_t read_u16_be(const unsigned char* p) {
    return static_cast<std::uint16_t>((p[0] << 8) | p[1]);
}

/// A RIFF or FORM size may exceed the bytes present by this much before the file counts as cut:
/// a missing pad byte after an odd last chunk, or a writer that stored the file length instead of
/// length - 8 (both seen in the wild; common practice, no source).
constexpr std::uintmax_t container_size_slack_bytes = 8;

/// "file: truncated: the <what> claims N bytes but the file holds only M".
[[noreturn]] void throw_truncated(const fs::path& path, const std::string& what, std::uintmax_t claimed,
                                  std::uintmax_t present) {
    throw io_error(path_text(path) + ": truncated or damaged: the " + what + " claims " + std::to_string(claimed) +
                   " bytes but the file holds only " + std::to_string(present));
}

/// Checks of a RIFF WAVE (little-endian sizes) or AIFF/AIFC (big-endian) chunk list, because
/// libsndfile quietly accepts a cut file when only its header says how long it should be:
///  - the RIFF/FORM size must not claim more than the file holds (beyond the slack above);
///  - the sample data chunk ("data" / "SSND") must end inside the file;
///  - AIFF: the frames that COMM claims must fit in SSND (libsndfile believes SSND; a COMM that
///    claims more means samples are missing). Checked for uncompressed data only (AIFF, and
///    AIFC with compression type NONE or sowt).
/// Sizes 0 and 0xFFFFFFFF mean "unknown" (streamed writers, RF64) and are not checked.
void check_chunk_list(std::ifstream& in, const fs::path& path, std::uintmax_t file_size, bool riff) {
    std::array<unsigned char, 12> head{};
    in.seekg(0);
    if (!in.read(reinterpret_cast<char*>(head.data()), head.size())) return;
    const std::uint32_t outer_size = riff ? read_u32_le(head.data() + 4) : read_u32_be(head.data() + 4);
    constexpr std::uintmax_t outer_header_bytes = 8;
    if (outer_size != 0 && outer_size != chunk_size_unknown &&
        outer_header_bytes + outer_size > file_size + container_size_slack_bytes) {
        throw_truncated(path, riff ? "RIFF header" : "FORM header", outer_header_bytes + outer_size, file_size);
    }
    const bool aifc = !riff && std::memcmp(head.data() + 8, "AIFC", 4) == 0;
    const char* data_id = riff ? "data" : "SSND";
    // AIFF COMM fields (Apple, AIFF 1.3 and AIFC draft, from memory): numChannels int16,
    // numSampleFrames uint32, sampleSize int16, sampleRate 80-bit; AIFC adds compressionType.
    constexpr std::size_t comm_min_bytes = 18;
    constexpr std::size_t aifc_comm_min_bytes = 22;
    std::optional<std::uintmax_t> comm_data_bytes;  // frames * channels * bytes per sample
    std::uint32_t comm_frames = 0;
    std::optional<std::uintmax_t> ssnd_sample_bytes;
    std::uintmax_t offset = head.size();
    for (int i = 0; i < max_chunks_scanned && offset + 8 <= file_size; ++i) {
        std::array<unsigned char, 8 + aifc_comm_min_bytes> chunk{};
        in.clear();
        in.seekg(static_cast<std::streamoff>(offset));
        in.read(reinterpret_cast<char*>(chunk.data()), chunk.size());
        const auto got = static_cast<std::size_t>(in.gcount());
        if (got < 8) return;
        const std::uint32_t size = riff ? read_u32_le(chunk.data() + 4) : read_u32_be(chunk.data() + 4);
        const std::uintmax_t body = offset + 8;
        if (!riff && std::memcmp(chunk.data(), "COMM", 4) == 0 && size >= comm_min_bytes &&
            got >= 8 + comm_min_bytes) {
            const unsigned char* c = chunk.data() + 8;
            const bool uncompressed = !aifc || (size >= aifc_comm_min_bytes && got >= 8 + aifc_comm_min_bytes &&
                                                (std::memcmp(c + comm_min_bytes, "NONE", 4) == 0 ||
                                                 std::memcmp(c + comm_min_bytes, "sowt", 4) == 0));
            constexpr unsigned bits_per_byte = 8;
            const unsigned sample_bytes = (read_u16_be(c + 6) + bits_per_byte - 1) / bits_per_byte;
            comm_frames = read_u32_be(c + 2);
            if (uncompressed) comm_data_bytes = std::uintmax_t{comm_frames} * read_u16_be(c) * sample_bytes;
        }
        if (std::memcmp(chunk.data(), data_id, 4) == 0) {
            if (size == chunk_size_unknown || size == 0) return;
            if (body + size > file_size) {
                throw_truncated(path, std::string(data_id) + " chunk", size, file_size > body ? file_size - body : 0);
            }
            // SSND body: offset uint32, blockSize uint32, then the samples from offset on.
            constexpr std::uint32_t ssnd_fields_bytes = 8;
            if (!riff && size >= ssnd_fields_bytes && got >= 8 + ssnd_fields_bytes) {
                const std::uint32_t skip = read_u32_be(chunk.data() + 8);
                ssnd_sample_bytes = size - ssnd_fields_bytes > skip ? size - ssnd_fields_bytes - skip : 0;
            }
            if (riff) return;
        }
        offset = body + size + (size & 1u);  // chunks are padded to an even length
    }
    if (comm_data_bytes && ssnd_sample_bytes && *comm_data_bytes > *ssnd_sample_bytes) {
        throw io_error(path_text(path) + ": truncated or damaged: the COMM chunk claims " +
                       std::to_string(comm_frames) + " frames (" + std::to_string(*comm_data_bytes) +
                       " bytes) but the SSND chunk holds only " + std::to_string(*ssnd_sample_bytes) + " bytes");
    }
}

/// The CRC of Ogg pages: CRC-32 with generator 0x04C11DB7, MSB first, initial value 0, no final
/// xor, computed over the page with its checksum field zeroed (RFC 3533, section 6).
class ogg_crc {
public:
    ogg_crc() {
        constexpr std::uint32_t generator = 0x04C11DB7u;
        constexpr std::uint32_t top_bit = 0x80000000u;
        for (std::uint32_t i = 0; i < table_.size(); ++i) {
            std::uint32_t r = i << 24;
            for (int b = 0; b < 8; ++b) r = (r & top_bit) != 0 ? (r << 1) ^ generator : r << 1;
            table_[i] = r;
        }
    }
    std::uint32_t update(std::uint32_t crc, const unsigned char* p, std::size_t n) const {
        for (std::size_t i = 0; i < n; ++i) crc = (crc << 8) ^ table_[((crc >> 24) ^ p[i]) & 0xFFu];
        return crc;
    }

private:
    std::array<std::uint32_t, 256> table_{};
};

/// Checks an Ogg file page by page (RFC 3533): every page starts where the previous one ended,
/// has version 0 and a valid checksum, continues its logical stream's page sequence without a
/// gap, and every stream begun is ended (end-of-stream flag) by the end of the file. libvorbisfile
/// skips damaged pages and libsndfile then reports a shorter sound as if nothing were wrong, so a
/// file with garbage inside or a cut end is refused here instead.
void check_ogg_pages(std::ifstream& in, const fs::path& path, std::uintmax_t file_size) {
    // Page header: "OggS", version, flags, granule position (8), serial (4), sequence (4),
    // checksum (4), segment count; then the segment table and the body.
    constexpr std::size_t header_bytes = 27;
    constexpr std::size_t crc_at = 22;
    constexpr unsigned char flag_bos = 0x02;
    constexpr unsigned char flag_eos = 0x04;
    constexpr std::size_t max_live_streams = 64;
    static const ogg_crc crc;
    struct live_stream {
        std::uint32_t serial;
        std::uint32_t next_sequence;
    };
    std::vector<live_stream> live;
    constexpr std::size_t max_segments = 255;       // the segment count is one byte
    constexpr std::size_t max_segment_bytes = 255;  // and so is each segment's length
    std::vector<unsigned char> page(header_bytes + max_segments + max_segments * max_segment_bytes);
    const auto damaged = [&](std::uintmax_t at, const std::string& what) {
        throw io_error(path_text(path) + ": damaged Ogg stream: the page at byte " + std::to_string(at) + " " + what);
    };
    std::uintmax_t offset = 0;
    in.clear();
    in.seekg(0);
    while (offset < file_size) {
        if (file_size - offset < header_bytes) damaged(offset, "is cut short (truncated file)");
        if (!in.read(reinterpret_cast<char*>(page.data()), header_bytes)) damaged(offset, "cannot be read");
        if (std::memcmp(page.data(), "OggS", 4) != 0) damaged(offset, "does not start with OggS (garbage in the file)");
        if (page[4] != 0) damaged(offset, "has an unknown version " + std::to_string(page[4]));
        const std::size_t segments = page[header_bytes - 1];
        if (!in.read(reinterpret_cast<char*>(page.data() + header_bytes), static_cast<std::streamsize>(segments))) {
            damaged(offset, "is cut short (truncated file)");
        }
        std::size_t body = 0;
        for (std::size_t i = 0; i < segments; ++i) body += page[header_bytes + i];
        const std::size_t total = header_bytes + segments + body;
        if (file_size - offset < total) damaged(offset, "is cut short (truncated file)");
        if (!in.read(reinterpret_cast<char*>(page.data() + header_bytes + segments), static_cast<std::streamsize>(body))) {
            damaged(offset, "cannot be read");
        }
        const std::uint32_t stored = read_u32_le(page.data() + crc_at);
        std::memset(page.data() + crc_at, 0, 4);
        if (crc.update(0, page.data(), total) != stored) damaged(offset, "has a bad checksum");
        const unsigned char flags = page[5];
        const std::uint32_t serial = read_u32_le(page.data() + 14);
        const std::uint32_t sequence = read_u32_le(page.data() + 18);
        auto it = std::find_if(live.begin(), live.end(), [&](const live_stream& s) { return s.serial == serial; });
        if ((flags & flag_bos) != 0) {
            if (it != live.end()) damaged(offset, "begins a stream that is already open");
            if (live.size() == max_live_streams) damaged(offset, "opens more than 64 streams at once");
            live.push_back({serial, sequence});
            it = live.end() - 1;
        }
        if (it == live.end()) damaged(offset, "belongs to no open stream (a page is missing)");
        if (sequence != it->next_sequence) damaged(offset, "is out of sequence (a page is missing)");
        it->next_sequence = sequence + 1;
        if ((flags & flag_eos) != 0) live.erase(it);
        offset += total;
    }
    if (!live.empty()) {
        throw io_error(path_text(path) + ": truncated: the Ogg stream has no end-of-stream page (the file is cut)");
    }
}

/// Container checks libsndfile leaves out; other containers are left to libsndfile and the
/// frames-read check. Ogg files are checked before libsndfile opens them (check_ogg_pages):
/// libvorbis leaks its header state on some damaged streams (found by fuzz_audio). RIFF and AIFF
/// are checked after libsndfile has opened them (check_chunk_list), so its own reason comes first.
enum class container_check_stage { before_open, after_open };
void check_container(const fs::path& path, std::uintmax_t file_size, container_check_stage stage) {
    std::ifstream in(path, std::ios::binary);
    if (!in) return;
    std::array<unsigned char, 12> head{};
    if (!in.read(reinterpret_cast<char*>(head.data()), head.size())) return;
    if (stage == container_check_stage::before_open) {
        if (std::memcmp(head.data(), "OggS", 4) == 0) check_ogg_pages(in, path, file_size);
        return;
    }
    const bool riff = std::memcmp(head.data(), "RIFF", 4) == 0 && std::memcmp(head.data() + 8, "WAVE", 4) == 0;
    const bool aiff = std::memcmp(head.data(), "FORM", 4) == 0 &&
                      (std::memcmp(head.data() + 8, "AIFF", 4) == 0 || std::memcmp(head.data() + 8, "AIFC", 4) == 0);
    if (riff || aiff) check_chunk_list(in, path, file_size, riff);
}

/// A byte count for messages: "2 GiB (2147483648 bytes)", or just the bytes below 1 MiB.
std::string bytes_text(std::uintmax_t bytes) {
    constexpr std::uintmax_t mib = std::uintmax_t{1} << 20;
    constexpr double bytes_per_gib = 1073741824.0;
    char buf[96];
    if (bytes >= (mib << 10)) {
        std::snprintf(buf, sizeof buf, "%.4g GiB (%ju bytes)", static_cast<double>(bytes) / bytes_per_gib, bytes);
    } else if (bytes >= mib) {
        std::snprintf(buf, sizeof buf, "%.4g MiB (%ju bytes)", static_cast<double>(bytes) / static_cast<double>(mib), bytes);
    } else {
        std::snprintf(buf, sizeof buf, "%ju bytes", bytes);
    }
    return buf;
}

/// 20 log10(peak), for messages.
std::string peak_dbfs_text(double peak) {
    char buf[64];
    std::snprintf(buf, sizeof buf, "%+.2f dBFS", to_level(amp_lin{peak}).db);
    return buf;
}

/// xorshift64* (Vigna 2016, "An experimental exploration of Marsaglia's xorshift generators,
/// scrambled", from memory), seeded through splitmix64 so any seed (also 0) gives a good state.
class dither_rng {
public:
    explicit dither_rng(std::uint64_t seed) {
        std::uint64_t z = seed + 0x9E3779B97F4A7C15ull;  // splitmix64 (Steele, Lea, Flood 2014, from memory)
        z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
        z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
        state_ = z ^ (z >> 31);
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

mono_audio read_audio(const fs::path& path, const audio_read_options& options) {
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

    check_container(path, file_size, container_check_stage::before_open);
    SF_INFO info{};
    sndfile_handle file(sf_open(path.c_str(), SFM_READ, &info));
    if (file.get() == nullptr) {
        throw io_error(path_text(path) + ": not a readable audio file: " + sf_strerror(nullptr));
    }
    if (info.channels <= 0) throw io_error(path_text(path) + ": header gives no channels");
    const double rate_hz = static_cast<double>(info.samplerate);
    if (!(rate_hz >= min_sample_rate_hz && rate_hz <= max_sample_rate_hz)) {
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
        char buf[192];
        std::snprintf(buf, sizeof buf, ": %.4g s long, longer than the %g s limit on input length (raise it with --max-input-s)",
                      claimed_s, options.max_length_s);
        throw io_error(path_text(path) + buf);
    }

    mono_audio out;
    out.sample_rate_hz = rate_hz;
    out.source_channels = info.channels;
    out.format_name = format_name_of(info.format);

    // A header may lie about its length: reserve no more than the file could hold at one byte
    // per frame; the vector grows if a compressed format really decodes to more.
    const auto total_frames = static_cast<std::size_t>(info.frames);
    out.samples.reserve(std::min<std::size_t>(total_frames, static_cast<std::size_t>(file_size)));

    const auto channels = static_cast<std::size_t>(info.channels);
    const std::size_t pick = options.channel ? static_cast<std::size_t>(*options.channel - 1) : 0;
    const double inv_channels = 1.0 / static_cast<double>(channels);
    const sf_count_t block_frames = std::max<sf_count_t>(1, io_block_frames / info.channels);
    std::vector<float> block(static_cast<std::size_t>(block_frames) * channels);
    std::size_t frames_done = 0;
    while (frames_done < total_frames) {
        const sf_count_t want =
            std::min<sf_count_t>(block_frames, static_cast<sf_count_t>(total_frames - frames_done));
        const sf_count_t got = sf_readf_float(file.get(), block.data(), want);
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
        const int err = sf_error(file.get());
        throw io_error(path_text(path) + ": truncated or damaged: decoded " + std::to_string(frames_done) + " of the " +
                       std::to_string(total_frames) + " frames the header claims" +
                       (err != 0 ? std::string(" (") + sf_strerror(file.get()) + ")" : std::string()));
    }
    return out;
}

void write_audio(const fs::path& path, std::span<const float> samples, double sample_rate_hz,
                 const audio_write_options& options) {
    const container cont = container_for(path);
    if (options.format == sample_format::float32 && cont.major == SF_FORMAT_FLAC) {
        throw io_error(path_text(path) + ": FLAC has no 32-bit float format (use 16 or 24 bits, or .wav/.aiff)");
    }
    if (!(sample_rate_hz >= min_sample_rate_hz && sample_rate_hz <= max_sample_rate_hz) ||
        sample_rate_hz != std::round(sample_rate_hz)) {
        char buf[64];
        std::snprintf(buf, sizeof buf, "%.10g", sample_rate_hz);
        throw io_error(path_text(path) + ": cannot write at sample rate " + buf +
                       " Hz (needs a whole number in 1 Hz..768 kHz)");
    }
    if (samples.empty()) throw io_error(path_text(path) + ": no samples to write");
    if (options.root_midi && (*options.root_midi < 0 || *options.root_midi > 127)) {
        throw io_error(path_text(path) + ": root MIDI note " + std::to_string(*options.root_midi) +
                       " is outside 0..127");
    }
    // The last guard against silent clipping: callers normalize or scale before this.
    double peak = 0.0;
    for (std::size_t i = 0; i < samples.size(); ++i) {
        const float s = samples[i];
        if (!std::isfinite(s)) {
            throw io_error(path_text(path) + ": refusing to write a " + (std::isnan(s) ? "NaN" : "infinite") +
                           " sample at frame " + std::to_string(i));
        }
        peak = std::max(peak, std::fabs(static_cast<double>(s)));
    }
    if (peak > 1.0) {
        throw io_error(path_text(path) + ": peak " + peak_dbfs_text(peak) +
                       " exceeds full scale; refusing to clip (scale the signal down first)");
    }

    SF_INFO info{};
    info.samplerate = static_cast<int>(sample_rate_hz);
    info.channels = 1;
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
    if (options.root_midi) {
        SF_INSTRUMENT inst{};
        inst.basenote = static_cast<char>(*options.root_midi);
        inst.velocity_lo = 0;
        inst.velocity_hi = 127;
        inst.key_lo = 0;
        inst.key_hi = 127;
        // WAV: libsndfile writes the smpl chunk. AIFF: libsndfile (1.2) accepts the instrument
        // but writes no INST chunk, so we append one after closing (append_aiff_inst_chunk).
        // FLAC has no instrument chunk; nothing is stored.
        if (cont.major == SF_FORMAT_WAV &&
            sf_command(file.get(), SFC_SET_INSTRUMENT, &inst, sizeof inst) != SF_TRUE) {
            throw io_error(path_text(path) + ": cannot store the root note: " + sf_strerror(file.get()));
        }
    }

    const auto fail_write = [&] {
        throw io_error(path_text(path) + ": write failed: " + sf_strerror(file.get()));
    };
    const std::size_t n = samples.size();
    const auto block_len = static_cast<std::size_t>(io_block_frames);
    if (options.format == sample_format::float32) {
        for (std::size_t start = 0; start < n; start += block_len) {
            const auto len = static_cast<sf_count_t>(std::min(block_len, n - start));
            if (sf_write_float(file.get(), samples.data() + start, len) != len) fail_write();
        }
    } else if (options.format == sample_format::pcm16) {
        // TPDF dither: the sum of two independent uniform values of +-0.5 LSB each, added before
        // rounding (Lipshitz, Wannamaker, Vanderkooy 1992, J. AES 40(5): renders the first two
        // moments of the total error independent of the signal). Clamping to the integer range
        // acts only within a step of full scale: +1.0 maps to 32768, one past the top, 32767,
        // and dither may push -1.0 one step below -32768.
        dither_rng rng(options.dither_seed);
        std::vector<short> block(block_len);
        constexpr double lo = -pcm16_full_scale;
        constexpr double hi = pcm16_full_scale - 1.0;
        for (std::size_t start = 0; start < n; start += block_len) {
            const std::size_t len = std::min(block_len, n - start);
            for (std::size_t i = 0; i < len; ++i) {
                double v = static_cast<double>(samples[start + i]) * pcm16_full_scale;
                if (options.dither) v += rng.uniform_half() + rng.uniform_half();
                block[i] = static_cast<short>(std::clamp(std::nearbyint(v), lo, hi));
            }
            if (sf_write_short(file.get(), block.data(), static_cast<sf_count_t>(len)) !=
                static_cast<sf_count_t>(len)) {
                fail_write();
            }
        }
    } else {
        // 24-bit: round to the nearest step, no dither (a float's 24-bit mantissa lands exactly).
        std::vector<int> block(block_len);
        constexpr double lo = -pcm24_full_scale;
        constexpr double hi = pcm24_full_scale - 1.0;
        for (std::size_t start = 0; start < n; start += block_len) {
            const std::size_t len = std::min(block_len, n - start);
            for (std::size_t i = 0; i < len; ++i) {
                const double v = static_cast<double>(samples[start + i]) * pcm24_full_scale;
                const auto q = static_cast<int>(std::clamp(std::nearbyint(v), lo, hi));
                block[i] = static_cast<int>(static_cast<unsigned>(q) << pcm24_in_int_shift);
            }
            if (sf_write_int(file.get(), block.data(), static_cast<sf_count_t>(len)) !=
                static_cast<sf_count_t>(len)) {
                fail_write();
            }
        }
    }
    if (file.close() != 0) throw io_error(path_text(path) + ": write failed while closing the file");
    if (options.root_midi && cont.major == SF_FORMAT_AIFF) {
        append_aiff_inst_chunk(out.temp_path(), path, *options.root_midi);
    }
    out.commit();
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

std::optional<sample_format> parse_sample_format(std::string_view text) {
    if (text == "16") return sample_format::pcm16;
    if (text == "24") return sample_format::pcm24;
    if (text == "32f") return sample_format::float32;
    return std::nullopt;
}

}  // namespace wane

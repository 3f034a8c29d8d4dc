// Container checks libsndfile leaves out (see audio_container.hpp).
#include "io/audio_container.hpp"

#include <algorithm>
#include <array>
#include <cstring>
#include <fstream>
#include <optional>
#include <string>
#include <vector>

#include "io/errors.hpp"
#include "io/sndfile_common.hpp"

namespace wane {

namespace fs = std::filesystem;
using sndfile_common::path_text;

namespace {

/// RIFF/AIFF chunk sizes that mean "length unknown" (streamed writers, RF64): not checked.
constexpr std::uint32_t chunk_size_unknown = 0xFFFFFFFFu;
/// How many chunks to walk when looking for the data chunk (a bound against looping headers).
constexpr int max_chunks_scanned = 4096;

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

}  // namespace

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

}  // namespace wane

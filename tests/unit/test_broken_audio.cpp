// Broken audio: files from sox (an independent writer) cut short or with header fields rewritten,
// at offsets found by walking the chunk layout (RIFF WAVE: Microsoft/IBM "Multimedia Programming
// Interface and Data Specifications 1.0", 1991; AIFF: Apple "Audio Interchange File Format 1.3",
// 1989; FLAC STREAMINFO: xiph.org FLAC format description; all from memory). Each must give an
// io_error naming the file on one line (libsndfile's own reason passed on when libsndfile refuses
// to open it), never a crash or another exception type, with a bounded number of bytes allocated
// (counted through operator new: tests/unit/allocation_count.hpp).
#include <catch2/catch.hpp>

#include <sndfile.h>
#include <unistd.h>

#include <atomic>
#include <cstdint>
#include <cstdlib>
#include <cstring>
#include <exception>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <string>
#include <vector>

#include "allocation_count.hpp"
#include "io/audio_file.hpp"
#include "io/errors.hpp"
#include "test_support.hpp"

using Catch::Matchers::Contains;
using namespace wane;
namespace fs = std::filesystem;

namespace {


std::string read_bytes(const fs::path& p) {
    std::ifstream f(p, std::ios::binary);
    return {std::istreambuf_iterator<char>(f), std::istreambuf_iterator<char>()};
}

void write_bytes(const fs::path& p, const std::string& bytes) {
    std::ofstream f(p, std::ios::binary | std::ios::trunc);
    f.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
    REQUIRE(f.good());
}

/// Runs sox to make `file` (`sox -n -r RATE ... file synth ...`); the generator is not ours.
fs::path sox_make(const fs::path& file, const std::string& format_args, const std::string& synth) {
    const std::string cmd = "sox -n -r 48000 " + format_args + " '" + file.string() + "' synth " + synth;
    REQUIRE(std::system(cmd.c_str()) == 0);
    return file;
}

void put_le32(std::string& s, std::size_t at, std::uint32_t v) {
    for (std::size_t i = 0; i < 4; ++i) s[at + i] = static_cast<char>((v >> (8 * i)) & 0xFF);
}
void put_le16(std::string& s, std::size_t at, std::uint32_t v) {
    for (std::size_t i = 0; i < 2; ++i) s[at + i] = static_cast<char>((v >> (8 * i)) & 0xFF);
}
void put_be32(std::string& s, std::size_t at, std::uint32_t v) {
    for (std::size_t i = 0; i < 4; ++i) s[at + i] = static_cast<char>((v >> (8 * (3 - i))) & 0xFF);
}
void put_be16(std::string& s, std::size_t at, std::uint32_t v) {
    for (std::size_t i = 0; i < 2; ++i) s[at + i] = static_cast<char>((v >> (8 * (1 - i))) & 0xFF);
}

/// Offset of the chunk with this id (its 4-byte id), walking the chunk list from byte 12 with
/// little-endian (RIFF) or big-endian (AIFF) sizes and even padding. Fails the test if absent.
std::size_t chunk_offset(const std::string& file, const char* id, bool big_endian) {
    std::size_t at = 12;
    while (at + 8 <= file.size()) {
        if (file.compare(at, 4, id) == 0) return at;
        std::uint32_t size = 0;
        for (std::size_t i = 0; i < 4; ++i) {
            const auto b = static_cast<std::uint32_t>(static_cast<unsigned char>(file[at + 4 + i]));
            size |= big_endian ? b << (8 * (3 - i)) : b << (8 * i);
        }
        at += 8 + size + (size & 1u);
    }
    FAIL("no " << id << " chunk");
    return 0;
}

/// Most bytes a refusal may allocate (through operator new; counted, not timed). The files are at
/// most ~100 kB; a reader that believed a header claiming 1e9 frames would allocate 4 GB for the
/// samples alone.
constexpr std::size_t max_refusal_bytes = std::size_t{256} << 20;

/// The message read_audio throws for this file, checked for: io_error (no other exception), one
/// line naming the file and containing `expect`, and the bytes allocated on the way.
std::string expect_refused(const fs::path& file, const std::string& expect, const audio_read_options& options = {}) {
    const test::allocation_peak_scope counted;
    std::string message;
    std::string other;
    try {
        const mono_audio a = read_audio(file, options);
        other = "accepted: " + std::to_string(a.samples.size()) + " samples at " + std::to_string(a.sample_rate_hz) + " Hz";
    } catch (const io_error& e) {
        message = e.what();
    } catch (const std::exception& e) {
        other = std::string("wrong exception type: ") + e.what();
    }
    const std::size_t allocated_bytes = counted.peak_bytes();
    INFO("file " << file.filename().string() << ": message '" << message << "' " << other);
    CAPTURE(allocated_bytes, expect);
    REQUIRE(other.empty());
    CHECK_THAT(message, Contains(file.string()));
    CHECK_THAT(message, Contains(expect));
    CHECK(message.find('\n') == std::string::npos);
    CHECK(allocated_bytes < max_refusal_bytes);
    return message;
}

/// libsndfile's own reason for refusing to open the file (empty if it opens it).
std::string libsndfile_open_error(const fs::path& file) {
    SF_INFO info{};
    SNDFILE* f = sf_open(file.c_str(), SFM_READ, &info);
    if (f != nullptr) {
        sf_close(f);
        return {};
    }
    return sf_strerror(nullptr);
}

/// Refused, and when libsndfile itself refuses to open the file its text is in the message.
void expect_refused_with_libsndfile_reason(const fs::path& file, const std::string& expect) {
    const std::string msg = expect_refused(file, expect);
    const std::string lib = libsndfile_open_error(file);
    INFO("libsndfile says: '" << lib << "'");
    if (!lib.empty()) CHECK_THAT(msg, Contains(lib));
}

/// Deterministic garbage (xorshift32, Marsaglia 2003), fixed seed.
std::string garbage(std::size_t n, std::uint32_t seed) {
    std::string s(n, '\0');
    for (char& c : s) {
        seed ^= seed << 13;
        seed ^= seed >> 17;
        seed ^= seed << 5;
        c = static_cast<char>(seed & 0xFF);
    }
    return s;
}

/// 10^9 frames: a header claiming this many for a file of a few kB.
constexpr std::uint32_t billion_frames = 1000000000u;

}  // namespace

TEST_CASE("broken WAV files are refused naming the file", "[broken_audio]") {
    wane::test::scratch_dir dir{"broken_audio"};
    // 0.1 s of 16-bit mono at 48 kHz: 4800 frames, 9600 data bytes.
    const std::string good = read_bytes(sox_make(dir / "good.wav", "-b 16 -c 1", "0.1 sine 440"));
    REQUIRE(read_audio(dir / "good.wav").samples.size() == 4800);
    const std::size_t fmt = chunk_offset(good, "fmt ", false);
    const std::size_t data = chunk_offset(good, "data", false);
    const auto save = [&](const std::string& name, const std::string& bytes) {
        write_bytes(dir / name, bytes);
        return dir / name;
    };

    SECTION("truncated headers") {
        expect_refused_with_libsndfile_reason(save("riff_only.wav", good.substr(0, 12)), "");
        expect_refused_with_libsndfile_reason(save("cut_in_fmt_id.wav", good.substr(0, fmt + 6)), "");
        expect_refused_with_libsndfile_reason(save("cut_in_fmt.wav", good.substr(0, fmt + 8 + 8)), "");
        expect_refused_with_libsndfile_reason(save("cut_in_data_header.wav", good.substr(0, data + 6)), "");
    }
    SECTION("truncated data chunks") {
        expect_refused(save("no_data_bytes.wav", good.substr(0, data + 8)), "");
        expect_refused(save("cut_mid_sample.wav", good.substr(0, data + 8 + 101)), "truncated");
        expect_refused(save("cut_at_half.wav", good.substr(0, data + 8 + 4800)), "truncated");
        expect_refused(save("one_byte_short.wav", good.substr(0, good.size() - 1)), "truncated");
    }
    SECTION("lying chunk sizes") {
        std::string s = good;
        put_le32(s, data + 4, 0x7FFFFFF0u);
        expect_refused(save("data_size_2g.wav", s), "truncated");
        s = good;
        put_le32(s, data + 4, static_cast<std::uint32_t>(good.size()));  // more than is left after the header
        expect_refused(save("data_size_file.wav", s), "truncated");
        s = good;
        put_le32(s, fmt + 4, 0x80000000u);  // a fmt chunk claiming 2^31 bytes
        expect_refused_with_libsndfile_reason(save("fmt_size_2g.wav", s), "");
        s = good;
        put_le32(s, fmt + 4, 0xFFFFFFF0u);
        expect_refused_with_libsndfile_reason(save("fmt_size_4g.wav", s), "");
        s = good;
        put_le32(s, fmt + 4, 2);  // too small for a format record
        expect_refused_with_libsndfile_reason(save("fmt_size_2.wav", s), "");
        s = good;
        put_le32(s, 4, 0x7FFFFFF0u);  // RIFF size far beyond the file
        expect_refused(save("riff_size_2g.wav", s), "RIFF");
        // A RIFF size smaller than its chunks (a writer that never went back to fix it) loses
        // nothing: the data chunk is whole. Such a file reads exactly like the good one.
        s = good;
        put_le32(s, 4, 20);  // RIFF size ending inside the fmt chunk
        CHECK(read_audio(save("riff_size_small.wav", s)).samples == read_audio(dir / "good.wav").samples);
    }
    SECTION("impossible format fields") {
        std::string s = good;
        put_le16(s, fmt + 8 + 2, 0);  // channels
        expect_refused_with_libsndfile_reason(save("zero_channels.wav", s), "");
        s = good;
        put_le16(s, fmt + 8 + 14, 0);  // bits per sample
        expect_refused_with_libsndfile_reason(save("zero_bits.wav", s), "");
        s = good;
        put_le32(s, fmt + 8 + 4, 0);  // sample rate
        expect_refused(save("zero_rate.wav", s), "");
        s = good;
        put_le16(s, fmt + 8, 0x7777);  // an unknown format tag
        expect_refused_with_libsndfile_reason(save("unknown_tag.wav", s), "");
    }
    SECTION("a header claiming 1e9 frames in a small file") {
        std::string s = good;
        put_le32(s, data + 4, 2 * billion_frames);  // 16-bit mono: 2 bytes per frame
        const fs::path f = save("billion_frames.wav", s);
        expect_refused(f, "truncated");
        // Still refused, and still in bounded memory, with the length limit lifted.
        expect_refused(f, "truncated", {.max_length_s = 1e9});
    }
}

TEST_CASE("broken AIFF files are refused naming the file", "[broken_audio]") {
    wane::test::scratch_dir dir{"broken_audio"};
    const std::string good = read_bytes(sox_make(dir / "good.aiff", "-b 16 -c 1", "0.1 sine 440"));
    REQUIRE(read_audio(dir / "good.aiff").samples.size() == 4800);
    const std::size_t comm = chunk_offset(good, "COMM", true);
    const std::size_t ssnd = chunk_offset(good, "SSND", true);
    const auto save = [&](const std::string& name, const std::string& bytes) {
        write_bytes(dir / name, bytes);
        return dir / name;
    };
    // COMM body: numChannels (int16), numSampleFrames (uint32), sampleSize (int16), sampleRate (80-bit float).
    SECTION("truncated headers") {
        expect_refused_with_libsndfile_reason(save("form_only.aiff", good.substr(0, 12)), "");
        expect_refused_with_libsndfile_reason(save("cut_in_comm.aiff", good.substr(0, comm + 8 + 10)), "");
        expect_refused_with_libsndfile_reason(save("cut_in_ssnd_header.aiff", good.substr(0, ssnd + 12)), "");
    }
    SECTION("truncated sample data") {
        expect_refused(save("cut_at_half.aiff", good.substr(0, ssnd + 16 + 4800)), "truncated");
        expect_refused(save("one_byte_short.aiff", good.substr(0, good.size() - 1)), "truncated");
    }
    SECTION("lying sizes and impossible fields") {
        std::string s = good;
        put_be32(s, ssnd + 4, 0x7FFFFFF0u);
        expect_refused(save("ssnd_size_2g.aiff", s), "truncated");
        s = good;
        put_be32(s, comm + 4, 0x80000000u);
        expect_refused_with_libsndfile_reason(save("comm_size_2g.aiff", s), "");
        s = good;
        put_be16(s, comm + 8, 0);
        expect_refused_with_libsndfile_reason(save("zero_channels.aiff", s), "");
        s = good;
        put_be32(s, 4, 0x7FFFFFF0u);
        expect_refused(save("form_size_2g.aiff", s), "FORM");
    }
    SECTION("COMM claiming 1e9 frames in a small file") {
        std::string s = good;
        put_be32(s, comm + 8 + 2, billion_frames);
        const fs::path f = save("billion_frames.aiff", s);
        expect_refused(f, "COMM chunk claims 1000000000 frames");
        expect_refused(f, "COMM chunk claims 1000000000 frames", {.max_length_s = 1e9});
    }
}

TEST_CASE("broken FLAC and OGG files are refused naming the file", "[broken_audio]") {
    wane::test::scratch_dir dir{"broken_audio"};
    const auto save = [&](const std::string& name, const std::string& bytes) {
        write_bytes(dir / name, bytes);
        return dir / name;
    };
    SECTION("FLAC") {
        // 1 s of noise (incompressible, so the file is long enough to cut anywhere).
        const std::string good = read_bytes(sox_make(dir / "good.flac", "-b 16 -c 1", "1 whitenoise vol 0.5"));
        REQUIRE(read_audio(dir / "good.flac").samples.size() == 48000);
        REQUIRE(good.compare(0, 4, "fLaC") == 0);
        expect_refused(save("cut_in_half.flac", good.substr(0, good.size() / 2)), "truncated");
        expect_refused(save("cut_at_90pc.flac", good.substr(0, good.size() * 9 / 10)), "truncated");
        expect_refused_with_libsndfile_reason(save("cut_in_streaminfo.flac", good.substr(0, 20)), "");
        // Garbage over the middle third of the frames.
        std::string s = good;
        s.replace(s.size() / 3, s.size() / 3, garbage(s.size() / 3, 12345));
        expect_refused(save("garbage_middle.flac", s), "");
        // STREAMINFO total samples (the low 36 bits of the big-endian 64-bit field at byte 18:
        // 4 "fLaC" + 4 block header + 10 of block/frame sizes) rewritten to 10^9.
        s = good;
        std::uint64_t packed = 0;
        for (std::size_t i = 0; i < 8; ++i) packed = (packed << 8) | static_cast<unsigned char>(s[18 + i]);
        constexpr std::uint64_t low36 = (std::uint64_t{1} << 36) - 1;
        packed = (packed & ~low36) | billion_frames;
        for (std::size_t i = 0; i < 8; ++i) s[18 + i] = static_cast<char>((packed >> (8 * (7 - i))) & 0xFF);
        const fs::path f = save("billion_frames.flac", s);
        expect_refused(f, "limit");  // 10^9 frames at 48 kHz = 20833 s, over the 1800 s default
        expect_refused(f, "truncated", {.max_length_s = 1e9});
    }
    SECTION("OGG Vorbis") {
        // Ogg pages are checked before libsndfile sees the file (RFC 3533: capture pattern,
        // checksum, page sequence, end-of-stream flag), so the messages are ours.
        const std::string good = read_bytes(sox_make(dir / "good.ogg", "-c 1", "1 whitenoise vol 0.5"));
        REQUIRE(!read_audio(dir / "good.ogg").samples.empty());
        REQUIRE(good.compare(0, 4, "OggS") == 0);
        expect_refused(save("cut_in_half.ogg", good.substr(0, good.size() / 2)), "damaged Ogg stream");
        expect_refused(save("cut_in_header.ogg", good.substr(0, 40)), "cut short");
        std::string s = good;
        s.replace(s.size() / 3, s.size() / 3, garbage(s.size() / 3, 777));
        expect_refused(save("garbage_middle.ogg", s), "damaged Ogg stream");
        s = good;
        s.replace(4, s.size() - 4, garbage(s.size() - 4, 4242));  // capture pattern, then garbage
        expect_refused(save("garbage_after_capture.ogg", s), "damaged Ogg stream");
        s = good;
        s[s.size() / 2] = static_cast<char>(s[s.size() / 2] ^ 0x10);  // one bit flipped
        expect_refused(save("one_bit_flipped.ogg", s), "bad checksum");
        // Cut exactly at a page boundary: every page is intact, but the stream has no end.
        const std::size_t last_page = good.rfind("OggS");
        REQUIRE(last_page > 0);
        expect_refused(save("last_page_missing.ogg", good.substr(0, last_page)), "no end-of-stream page");
    }
}

TEST_CASE("inputs over the size and length limits are refused naming the limit and its option", "[broken_audio]") {
    wane::test::scratch_dir dir{"broken_audio"};
    const fs::path good = sox_make(dir / "good.wav", "-b 16 -c 1", "0.1 sine 440");  // 4800 frames, 9644 bytes
    const auto size = static_cast<std::uintmax_t>(fs::file_size(good));
    CAPTURE(size);
    CHECK(read_audio(good, {.max_file_bytes = size}).samples.size() == 4800);
    expect_refused(good, "larger than the " + std::to_string(size - 1) + " bytes limit on input files",
                   {.max_file_bytes = size - 1});
    CHECK_THAT(expect_refused(good, "", {.max_file_bytes = 1000}), Contains("--max-input-mib"));
    CHECK_THAT(expect_refused(good, "longer than the 0.05 s limit", {.max_length_s = 0.05}), Contains("--max-input-s"));

    // The default byte limit, on a sparse 3 GiB file (no disk space used) that starts with a
    // valid header: refused before libsndfile reads it.
    const fs::path huge = dir / "huge.wav";
    fs::copy_file(good, huge);
    constexpr std::uintmax_t three_gib = std::uintmax_t{3} << 30;
    fs::resize_file(huge, three_gib);
    CHECK(default_max_input_bytes == std::uintmax_t{2147483648});
    CHECK_THAT(expect_refused(huge, "3221225472 bytes, larger than the 2 GiB (2147483648 bytes) limit"),
               Contains("--max-input-mib"));
}

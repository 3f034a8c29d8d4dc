// Audio files built byte by byte for the audio I/O tests: WAV bytes assembled by hand from the RIFF
// layout (an independent writer), and the folder and file helpers both test programs use.
#pragma once

#include <catch2/catch.hpp>

#include <cstdint>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <set>
#include <string>
#include <vector>

namespace wane::test {

inline std::set<std::string> entries(const std::filesystem::path& dir) {
    std::set<std::string> names;
    for (const auto& e : std::filesystem::directory_iterator(dir)) names.insert(e.path().filename().string());
    return names;
}

inline void put_u16(std::string& s, std::uint32_t v) {
    s.push_back(static_cast<char>(v & 0xFF));
    s.push_back(static_cast<char>((v >> 8) & 0xFF));
}
inline void put_u32(std::string& s, std::uint32_t v) {
    put_u16(s, v & 0xFFFF);
    put_u16(s, v >> 16);
}

/// A canonical 44-byte-header WAV assembled by hand from the RIFF WAVE layout (Microsoft/IBM
/// "Multimedia Programming Interface and Data Specifications 1.0", 1991, from memory): format tag 1 = PCM,
/// 3 = IEEE float. `data` is the raw little-endian sample bytes.
inline std::string wav_bytes(std::uint32_t format_tag, std::uint32_t channels, std::uint32_t rate_hz,
                      std::uint32_t bits, const std::string& data) {
    std::string s = "RIFF";
    put_u32(s, static_cast<std::uint32_t>(36 + data.size()));
    s += "WAVEfmt ";
    put_u32(s, 16);
    put_u16(s, format_tag);
    put_u16(s, channels);
    put_u32(s, rate_hz);
    const std::uint32_t block_align = channels * bits / 8;
    put_u32(s, rate_hz * block_align);
    put_u16(s, block_align);
    put_u16(s, bits);
    s += "data";
    put_u32(s, static_cast<std::uint32_t>(data.size()));
    s += data;
    return s;
}
/// Byte offset of the sample-rate field in the header above.
inline constexpr std::size_t wav_rate_offset = 24;

inline std::string pcm16_data(const std::vector<int>& values) {
    std::string d;
    for (int v : values) put_u16(d, static_cast<std::uint32_t>(v) & 0xFFFF);
    return d;
}
inline std::string float_data(const std::vector<float>& values) {
    std::string d;
    for (float v : values) {
        std::uint32_t bits = 0;
        std::memcpy(&bits, &v, sizeof bits);
        put_u32(d, bits);
    }
    return d;
}

inline void write_bytes(const std::filesystem::path& p, const std::string& bytes) {
    std::ofstream f(p, std::ios::binary);
    f.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
    REQUIRE(f.good());
}
inline std::string read_bytes(const std::filesystem::path& p) {
    std::ifstream f(p, std::ios::binary);
    return {std::istreambuf_iterator<char>(f), std::istreambuf_iterator<char>()};
}

}  // namespace wane::test

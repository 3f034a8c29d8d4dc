// Container checks libsndfile leaves out (internal to src/io): a RIFF/AIFF header or data chunk
// claiming more bytes than the file holds, an AIFF COMM claiming more frames than SSND holds, an
// Ogg stream whose pages do not chain to the end with valid checksums.
#pragma once

#include <cstdint>
#include <filesystem>

namespace wane {

/// Container checks libsndfile leaves out; other containers are left to libsndfile and the
/// frames-read check. Ogg files are checked before libsndfile opens them (check_ogg_pages):
/// libvorbis leaks its header state on some damaged streams (found by fuzz_audio). RIFF and AIFF
/// are checked after libsndfile has opened them (check_chunk_list), so its own reason comes first.
enum class container_check_stage { before_open, after_open };
void check_container(const std::filesystem::path& path, std::uintmax_t file_size, container_check_stage stage);

}  // namespace wane

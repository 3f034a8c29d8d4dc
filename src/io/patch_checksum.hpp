// The checksum wane writes at the end of every patch file it writes, so it can tell a patch edited
// by hand since (and not overwrite it without being told to).
#pragma once

#include <cstdint>
#include <filesystem>
#include <string>
#include <string_view>

namespace wane {

/// FNV-1a, 64 bits, of text.
std::uint64_t fnv1a64(std::string_view text);

/// Patch text with one comment line appended:
/// "# checksum fnv1a64 <16 hex digits> (...)" over everything before it. Readers ignore it.
std::string with_checksum(std::string_view text);

enum class patch_mark {
    unchanged,   ///< the checksum line matches the rest: as wane wrote it
    edited,      ///< a checksum line that no longer matches: edited since
    unmarked,    ///< no checksum line: written by hand, or by another program
};
/// What the checksum of a patch text says.
patch_mark patch_mark_of(std::string_view text);

/// Throws io_error when path exists and is not a patch exactly as wane wrote it (edited since, or
/// without a checksum), unless allowed: "p.toml: was edited since wane wrote it; nothing written
/// (add --overwrite-edited to replace it)". option names the option that allows it.
void refuse_overwriting_edited_patch(const std::filesystem::path& path, bool allowed, std::string_view option);

}  // namespace wane

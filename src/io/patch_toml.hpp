// The patch format's TOML mapping (toml++). Reading validates everything and reports errors as
// "file:line:col: partial 3: decay[1].t60_s must not be 0"; writing is canonical, so reading a
// patch and writing it again gives the same bytes.
#pragma once

#include <filesystem>
#include <string>
#include <string_view>
#include <vector>

#include "core/patch.hpp"

namespace wane {

struct patch_read_result {
    patch value;
    /// Non-fatal findings, e.g. "pluck.toml:7:1: unknown key 'lenght_s' (did you mean 'length_s'?)".
    std::vector<std::string> warnings;
};

/// Parses and validates patch text; source_name is used in messages. Throws patch_error.
patch_read_result parse_patch(std::string_view text, std::string_view source_name);
/// Reads and validates a patch file. Throws patch_error (or io_error when unreadable).
patch_read_result read_patch_file(const std::filesystem::path& path);
/// Canonical text of a patch (with the explanatory comment block at the top).
std::string format_patch(const patch& p);
/// Writes format_patch(p) atomically, with the checksum line of io/patch_checksum.hpp.
void write_patch_file(const std::filesystem::path& path, const patch& p);

}  // namespace wane

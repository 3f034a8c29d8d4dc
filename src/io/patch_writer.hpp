// The patch writer: the canonical text of a patch, produced here rather than by toml++'s formatter,
// with the fixed number format of each quantity (core/patch_numbers), so that reading a file the
// writer wrote and writing it again gives the same bytes.
#pragma once

#include <string>
#include <string_view>

#include "core/patch.hpp"

namespace wane {

/// A TOML basic string: quotes, backslash and control characters escaped; invalid UTF-8 bytes
/// (possible in file names) become U+FFFD so the file always parses.
std::string toml_string(std::string_view s);
/// The text of a patch already validated, rounded and in canonical order (see format_patch).
std::string format_text(const patch& p);

}  // namespace wane

// A guard run over patch text before toml++ parses it. toml++ 3.3.0 (Debian 12) reaches
// TOML_UNREACHABLE (undefined behaviour) in its generated Unicode tables when it meets some
// non-ASCII characters where TOML allows only whitespace, e.g. U+01FE inside a number
// (found by fuzz_patch; kept in tests/fuzz/regressions/patch/). TOML 1.0 allows non-ASCII text
// only inside strings and comments (bare keys and whitespace are ASCII), so refusing it anywhere
// else refuses no valid patch and keeps such bytes away from that code.
#pragma once

#include <string>
#include <string_view>

namespace wane {

/// Throws patch_error "source:line:col: not valid TOML: a non-ASCII character outside a string or
/// a comment" for the first byte >= 0x80 outside basic, literal and multi-line strings and
/// comments. Linear in the text; malformed strings (unterminated, newline in a one-line string)
/// are left for the parser to report.
void refuse_non_ascii_outside_strings(std::string_view text, const std::string& source_name);

}  // namespace wane

// A guard run over patch text before toml++ parses it. toml++ 3.3.0 (Debian 12) reaches
// TOML_UNREACHABLE (undefined behaviour) in its generated Unicode tables when it meets some
// non-ASCII characters where TOML allows only whitespace, e.g. U+01FE inside a number
// (found by fuzz_patch; kept in tests/fuzz/regressions/patch/). TOML 1.0 allows non-ASCII text
// only inside strings and comments (bare keys and whitespace are ASCII), so refusing it anywhere
// else refuses no valid patch and keeps such bytes away from that code.
#pragma once

#include <cstddef>
#include <string>
#include <string_view>

namespace wane {

/// Bounds of guard_toml_text.
struct toml_text_limits {
    /// Deepest nesting a document may have; the guard refuses, before parsing, a dotted key or a
    /// table header with more than this many dots and brackets or braces nested deeper than
    /// twice this (the parser recurses on each, so a key 50,000 levels deep overflowed its stack).
    int max_nesting_depth = 0;  ///< 0: not checked
    /// Longest line in bytes (0: not checked).
    std::size_t max_line_bytes = 0;
};

/// Throws patch_error "source:line:col: not valid TOML: a non-ASCII character outside a string or
/// a comment" for the first byte >= 0x80 outside basic, literal and multi-line strings and
/// comments; "source:line:col: tables and arrays nest more than N levels deep here, deeper than any
/// patch" (the same line as the reader's depth check) for a key, header or value nested too deep;
/// "source:line: line of B bytes, longer than the L a patch may have". Linear in the text;
/// malformed strings (unterminated, newline in a one-line string) are left for the parser.
void guard_toml_text(std::string_view text, const std::string& source_name, const toml_text_limits& limits);

/// guard_toml_text with no depth or line bound: the non-ASCII check alone.
inline void refuse_non_ascii_outside_strings(std::string_view text, const std::string& source_name) {
    guard_toml_text(text, source_name, {});
}

}  // namespace wane

#include "io/toml_guard.hpp"

#include <algorithm>

#include "io/errors.hpp"

namespace wane {

namespace {

[[noreturn]] void too_deep(const std::string& source_name, std::size_t line, std::size_t column, int max_depth) {
    throw patch_error(source_name + ":" + std::to_string(line) + ":" + std::to_string(column) +
                      ": tables and arrays nest more than " + std::to_string(max_depth) +
                      " levels deep here, deeper than any patch");
}

/// Refuses the line [line_start, end) (number `line`) when it is longer than limits.max_line_bytes.
void check_line_length(std::string_view text, std::size_t line_start, std::size_t end, std::size_t line,
                       const std::string& source_name, const toml_text_limits& limits) {
    if (limits.max_line_bytes > 0 && end - line_start > limits.max_line_bytes) {
        // Name the key the line starts with, when it has a short one.
        constexpr std::size_t max_key_shown = 64;
        const std::string_view head = text.substr(line_start, std::min(end - line_start, max_key_shown + 1));
        const std::size_t eq = head.find('=');
        std::string key(head.substr(0, eq == std::string_view::npos ? 0 : eq));
        while (!key.empty() && (key.back() == ' ' || key.back() == '\t')) key.pop_back();
        const bool plain = !key.empty() && key.find_first_of("\"'\t") == std::string::npos;
        throw patch_error(source_name + ":" + std::to_string(line) + ": line of " +
                          std::to_string(end - line_start) + " bytes" + (plain ? " (key '" + key + "')" : "") +
                          ", longer than the " +
                          std::to_string(limits.max_line_bytes) + " a patch may have");
    }
}

/// Counts one code character toward the nesting bounds: dots of a dotted key or header (reset by
/// '=', ',', brackets and braces) and open brackets and braces; refuses beyond max_depth.
void count_nesting(char c, int& dots, int& brackets, int max_depth, const std::string& source_name, std::size_t line,
                   std::size_t column) {
    if (c == '.') {
        if (++dots > max_depth) too_deep(source_name, line, column, max_depth);
    } else if (c == '[' || c == '{') {
        dots = 0;
        if (++brackets > 2 * max_depth) too_deep(source_name, line, column, max_depth);
    } else if (c == ']' || c == '}') {
        dots = 0;
        brackets = brackets > 0 ? brackets - 1 : 0;
    } else if (c == '=' || c == ',') {
        dots = 0;
    }
}

}  // namespace

void guard_toml_text(std::string_view text, const std::string& source_name, const toml_text_limits& limits) {
    enum class state { code, comment, basic, literal, multi_basic, multi_literal };
    constexpr unsigned char first_non_ascii = 0x80;
    // A multi-line string may end with up to two quotes of content before its closing three.
    constexpr std::size_t max_closing_quotes = 5;
    state s = state::code;
    std::size_t line = 1;
    std::size_t line_start = 0;
    // Dots since the last character that ends a key or a value ('=', ',', a bracket, a brace, a
    // newline): a dotted key or header has one per level; a value has at most one (1.5, 00.999).
    int dots = 0;
    int brackets = 0;  // [ and { open in code, minus ] and }
    const auto starts = [&](std::size_t i, std::string_view what) { return text.substr(i, what.size()) == what; };
    for (std::size_t i = 0; i < text.size(); ++i) {
        const char c = text[i];
        if (c == '\n') {
            check_line_length(text, line_start, i, line, source_name, limits);
            ++line;
            line_start = i + 1;
            dots = 0;
            if (s == state::comment || s == state::basic || s == state::literal) s = state::code;
            continue;
        }
        switch (s) {
            case state::code:
                if (static_cast<unsigned char>(c) >= first_non_ascii) {
                    throw patch_error(source_name + ":" + std::to_string(line) + ":" + std::to_string(i - line_start + 1) +
                                      ": not valid TOML: a non-ASCII character outside a string or a comment");
                }
                if (limits.max_nesting_depth > 0) {
                    count_nesting(c, dots, brackets, limits.max_nesting_depth, source_name, line, i - line_start + 1);
                }
                if (c == '#') {
                    s = state::comment;
                } else if (c == '"') {
                    s = starts(i, "\"\"\"") ? state::multi_basic : state::basic;
                    if (s == state::multi_basic) i += 2;
                } else if (c == '\'') {
                    s = starts(i, "'''") ? state::multi_literal : state::literal;
                    if (s == state::multi_literal) i += 2;
                }
                break;
            case state::comment: break;
            case state::basic:
                if (c == '\\') {
                    if (i + 1 < text.size() && text[i + 1] != '\n') ++i;
                } else if (c == '"') {
                    s = state::code;
                }
                break;
            case state::literal:
                if (c == '\'') s = state::code;
                break;
            case state::multi_basic:
            case state::multi_literal: {
                const char quote = s == state::multi_basic ? '"' : '\'';
                if (s == state::multi_basic && c == '\\') {
                    if (i + 1 < text.size() && text[i + 1] != '\n') ++i;
                } else if (c == quote && starts(i, s == state::multi_basic ? "\"\"\"" : "'''")) {
                    std::size_t run = 0;
                    while (i + run < text.size() && text[i + run] == quote && run < max_closing_quotes) ++run;
                    i += run - 1;
                    s = state::code;
                }
                break;
            }
        }
    }
    check_line_length(text, line_start, text.size(), line, source_name, limits);
}

}  // namespace wane

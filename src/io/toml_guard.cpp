#include "io/toml_guard.hpp"

#include "io/errors.hpp"

namespace wane {

void refuse_non_ascii_outside_strings(std::string_view text, const std::string& source_name) {
    enum class state { code, comment, basic, literal, multi_basic, multi_literal };
    constexpr unsigned char first_non_ascii = 0x80;
    // A multi-line string may end with up to two quotes of content before its closing three.
    constexpr std::size_t max_closing_quotes = 5;
    state s = state::code;
    std::size_t line = 1;
    std::size_t line_start = 0;
    const auto starts = [&](std::size_t i, std::string_view what) { return text.substr(i, what.size()) == what; };
    for (std::size_t i = 0; i < text.size(); ++i) {
        const char c = text[i];
        if (c == '\n') {
            ++line;
            line_start = i + 1;
            if (s == state::comment || s == state::basic || s == state::literal) s = state::code;
            continue;
        }
        switch (s) {
            case state::code:
                if (static_cast<unsigned char>(c) >= first_non_ascii) {
                    throw patch_error(source_name + ":" + std::to_string(line) + ":" + std::to_string(i - line_start + 1) +
                                      ": not valid TOML: a non-ASCII character outside a string or a comment");
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
}

}  // namespace wane

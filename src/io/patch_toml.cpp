// The patch format's TOML mapping (format "wane-patch", version 2; version 1 is read too): the entry points. The jobs live
// apart: the format's number formats (core/patch_numbers) and rules (core/patch_rules), the reader
// (io/patch_reader) with its key hints (io/patch_keys), the writer (io/patch_writer). Here: the
// checks on hostile input before the TOML tree is built or walked, and file reading and writing.
#include "io/patch_toml.hpp"
#include "io/patch_checksum.hpp"
#include "io/toml_guard.hpp"

#include <toml++/toml.h>

#include <fstream>
#include <system_error>

#include "core/patch_numbers.hpp"
#include "core/patch_rules.hpp"
#include "io/atomic_file.hpp"
#include "io/errors.hpp"
#include "io/patch_reader.hpp"
#include "io/patch_writer.hpp"

namespace wane {

using namespace patch_rules;

namespace {

/// Refuses structures nested deeper than a patch has, before the reader walks them.
void check_depth(const toml::node& n, int depth, const std::string& source_name) {
    if (!n.is_table() && !n.is_array()) return;
    if (depth > max_nesting_depth) {
        const auto& b = n.source().begin;
        throw patch_error(source_name + ":" + std::to_string(b.line) + ":" + std::to_string(b.column) +
                          ": tables and arrays nest more than " + std::to_string(max_nesting_depth) +
                          " levels deep here, deeper than any patch");
    }
    if (const toml::table* t = n.as_table()) {
        for (const auto& [k, child] : *t) {
            (void)k;
            check_depth(child, depth + 1, source_name);
        }
    } else if (const toml::array* a = n.as_array()) {
        for (const toml::node& child : *a) check_depth(child, depth + 1, source_name);
    }
}

/// Counts [[partial]] and [[noise]] header lines before parsing, so a file with far too many is
/// refused in linear time without building its tree (a header inside a multi-line string would
/// count too; no valid patch has thousands of those).
void prescan_counts(std::string_view text, const std::string& source_name) {
    std::size_t partials = 0;
    std::size_t bands = 0;
    std::size_t line = 1;
    for (std::size_t i = 0; i < text.size(); ++line) {
        std::size_t eol = text.find('\n', i);
        if (eol == std::string_view::npos) eol = text.size();
        std::string_view l = text.substr(i, eol - i);
        i = eol + 1;
        const std::size_t first = l.find_first_not_of(" \t");
        if (first == std::string_view::npos || l.substr(first, 2) != "[[") continue;
        l.remove_prefix(first + 2);
        const std::size_t close = l.find("]]");
        if (close == std::string_view::npos) continue;
        l = l.substr(0, close);
        const std::size_t a = l.find_first_not_of(" \t");
        const std::size_t b = l.find_last_not_of(" \t");
        if (a == std::string_view::npos) continue;
        const std::string_view name = l.substr(a, b - a + 1);
        const bool too_many = (name == "partial" && ++partials > max_partials) ||
                              (name == "noise" && ++bands > max_noise_bands);
        if (too_many) {
            const bool is_partial = name == "partial";
            throw patch_error(source_name + ":" + std::to_string(line) + ":" + std::to_string(first + 1) +
                              ": more than " + std::to_string(is_partial ? max_partials : max_noise_bands) +
                              (is_partial ? " [[partial]] tables; at most " : " [[noise]] tables; at most ") +
                              std::to_string(is_partial ? max_partials : max_noise_bands) + " are allowed");
        }
    }
}

}  // namespace

patch_read_result parse_patch(std::string_view text, std::string_view source_name) {
    const std::string name(source_name);
    if (text.size() > max_patch_file_bytes) {
        throw patch_error(name + ": " + std::to_string(text.size()) + " bytes is larger than the " +
                          max_patch_file_text + " a patch may have");
    }
    guard_toml_text(text, name, {.max_nesting_depth = max_nesting_depth, .max_line_bytes = max_line_bytes});
    prescan_counts(text, name);
    toml::table root;
    try {
        root = toml::parse(text, name);
    } catch (const toml::parse_error& e) {
        const auto& b = e.source().begin;
        throw patch_error(name + ":" + std::to_string(b.line) + ":" + std::to_string(b.column) +
                          ": not valid TOML: " + std::string(e.description()));
    }
    check_depth(root, 0, name);
    return read_patch_tree(root, source_name);
}

patch_read_result read_patch_file(const std::filesystem::path& path) {
    const std::string name = path.string();
    std::error_code ec;
    const auto size = std::filesystem::file_size(path, ec);
    if (ec) throw io_error(name + ": cannot read: " + ec.message());
    if (size > max_patch_file_bytes) {
        throw patch_error(name + ": " + std::to_string(size) + " bytes is larger than the " + max_patch_file_text +
                          " a patch may have");
    }
    std::ifstream in(path, std::ios::binary);
    if (!in) throw io_error(name + ": cannot open for reading");
    std::string text(static_cast<std::size_t>(size), '\0');
    in.read(text.data(), static_cast<std::streamsize>(size));
    if (static_cast<std::size_t>(in.gcount()) != size) throw io_error(name + ": read failed");
    return parse_patch(text, name);
}

std::string format_patch(const patch& p) {
    patch sorted = p;
    canonicalize(sorted);
    validate_and_round(sorted, [](const std::string& path, const std::string& what) {
        const std::string shown = display(path);
        throw patch_error("patch to write is invalid: " + (shown.empty() ? what : shown + " " + what));
    });
    return format_text(sorted);
}

void write_patch_file(const std::filesystem::path& path, const patch& p) {
    write_file_atomic(path, with_checksum(format_patch(p)));
}

}  // namespace wane

#include "io/patch_checksum.hpp"

#include <cstdint>
#include <cstdio>
#include <fstream>
#include <iterator>

#include "io/errors.hpp"

namespace wane {

namespace {

constexpr std::string_view mark_prefix = "# checksum fnv1a64 ";
constexpr std::string_view mark_note = " (written by wane; an edit changes it, and wane then keeps the file)";
constexpr std::size_t hex_digits = 16;
/// Largest file looked at: the patch format's own limit (16 MiB); a bigger file is no patch of ours.
constexpr std::uintmax_t max_checked_bytes = std::uintmax_t{16} << 20;

}  // namespace

/// FNV-1a, 64 bits (Fowler, Noll, Vo; offset basis and prime from the published parameters,
/// www.isthe.com/chongo/tech/comp/fnv): a checksum against accidental change, not an attacker.
std::uint64_t fnv1a64(std::string_view text) {
    constexpr std::uint64_t offset_basis = 0xcbf29ce484222325ULL;
    constexpr std::uint64_t prime = 0x100000001b3ULL;
    std::uint64_t h = offset_basis;
    for (const char c : text) {
        h ^= static_cast<unsigned char>(c);
        h *= prime;
    }
    return h;
}

namespace {

std::string hex(std::uint64_t v) {
    char buf[hex_digits + 1];
    std::snprintf(buf, sizeof buf, "%016llx", static_cast<unsigned long long>(v));
    return buf;
}

}  // namespace

std::string with_checksum(std::string_view text) {
    std::string out(text);
    if (!out.empty() && out.back() != '\n') out += '\n';
    const std::string body = out;
    out += mark_prefix;
    out += hex(fnv1a64(body));
    out += mark_note;
    out += '\n';
    return out;
}

patch_mark patch_mark_of(std::string_view text) {
    // The last mark that starts a line; anything after it (an appended line) is an edit as well.
    std::size_t at = text.starts_with(mark_prefix) ? 0 : std::string_view::npos;
    const std::string line_start = "\n" + std::string(mark_prefix);
    if (const std::size_t nl = text.rfind(line_start); nl != std::string_view::npos) at = nl + 1;
    if (at == std::string_view::npos) return patch_mark::unmarked;
    return with_checksum(text.substr(0, at)) == text ? patch_mark::unchanged : patch_mark::edited;
}

void refuse_overwriting_edited_patch(const std::filesystem::path& path, bool allowed, std::string_view option) {
    std::error_code ec;
    if (allowed || !std::filesystem::exists(path, ec)) return;
    const std::string name = path.string();
    const std::string how = "; nothing written (add " + std::string(option) + " to replace it)";
    if (!std::filesystem::is_regular_file(path, ec) || std::filesystem::file_size(path, ec) > max_checked_bytes) {
        throw io_error(name + ": exists and is not a patch wane wrote" + how);
    }
    std::ifstream in(path, std::ios::binary);
    const std::string text((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
    switch (patch_mark_of(text)) {
        case patch_mark::unchanged: return;
        case patch_mark::edited: throw io_error(name + ": was edited since wane wrote it" + how);
        case patch_mark::unmarked: throw io_error(name + ": exists and has no checksum of wane's (written by hand?)" + how);
    }
}

}  // namespace wane

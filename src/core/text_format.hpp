// printf-style text of numbers, one home for the snprintf-into-a-buffer pattern: the result is
// never cut short (a longer text gets a second, exact-size pass). Locale: the C locale's, which
// wane never changes. Number formats that are part of the patch file are core/patch_numbers'.
#pragma once

#include <cstdio>
#include <string>

namespace wane {

/// printf_text("%.2f dB", -3.0) -> "-3.00 dB". The format must match the arguments.
template <class... Args>
std::string printf_text(const char* format, Args... args) {
    char buf[256];
#if defined(__GNUC__)
#pragma GCC diagnostic push
#pragma GCC diagnostic ignored "-Wformat-nonliteral"
#pragma GCC diagnostic ignored "-Wformat-security"
#endif
    const int n = std::snprintf(buf, sizeof buf, format, args...);
    if (n < 0) return {};
    if (static_cast<std::size_t>(n) < sizeof buf) return std::string(buf, static_cast<std::size_t>(n));
    std::string out(static_cast<std::size_t>(n) + 1, '\0');
    std::snprintf(out.data(), out.size(), format, args...);
#if defined(__GNUC__)
#pragma GCC diagnostic pop
#endif
    out.pop_back();
    return out;
}

}  // namespace wane

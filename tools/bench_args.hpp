// Option values of the benchmark programs in tools/ (header only; not a program): a value that is
// not wholly a number, or out of its range, stops the program with one line naming the option
// (exit 2), as the command-line tool's own options do.
#pragma once

#include <charconv>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>

namespace wane::bench {

/// The integer `text` given for `option` (a flag or an environment variable's name), at least
/// `least`; anything else ends the program with exit 2.
inline int int_option(const char* program, const char* option, const char* text, int least) {
    int value = 0;
    const char* end = text + std::strlen(text);
    const auto [ptr, ec] = std::from_chars(text, end, value);
    if (ec != std::errc{} || ptr != end || value < least) {
        std::fprintf(stderr, "%s: %s %s: need a whole number >= %d\n", program, option, text, least);
        std::exit(2);
    }
    return value;
}

/// The finite number `text` given for `option`; anything else ends the program with exit 2.
inline double number_option(const char* program, const char* option, const char* text) {
    char* end = nullptr;
    const double value = std::strtod(text, &end);
    if (end == text || *end != '\0' || !std::isfinite(value)) {
        std::fprintf(stderr, "%s: %s %s: need a finite number\n", program, option, text);
        std::exit(2);
    }
    return value;
}

}  // namespace wane::bench

// Helpers for tests that edit a patch's TOML text and read back the loader's verdict.
#pragma once

#include <catch2/catch.hpp>

#include <string>

#include "io/errors.hpp"
#include "io/patch_toml.hpp"

namespace wane::test {

/// The text with the first occurrence of `from` replaced by `to` (which must be there).
inline std::string with(std::string text, const std::string& from, const std::string& to) {
    const std::size_t at = text.find(from);
    REQUIRE(at != std::string::npos);
    text.replace(at, from.size(), to);
    return text;
}

/// The patch_error message for the text loaded as file `name` (empty when it loads).
inline std::string error_of(const std::string& text, const std::string& name) {
    try {
        (void)parse_patch(text, name);
    } catch (const patch_error& e) {
        return e.what();
    }
    return {};
}

}  // namespace wane::test

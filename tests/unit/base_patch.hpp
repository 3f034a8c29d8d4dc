// The base test patch of the patch-format tests (format version 1, one key per line) and the check
// that a text is refused with a message naming the file, the line and the key.
#pragma once

#include <catch2/catch.hpp>

#include <algorithm>
#include <string>

#include "patch_text.hpp"

namespace wane::test {

// A small valid patch, one key per line so each rule's line is easy to find.
inline const std::string base_text = R"(format = "wane-patch"
version = 1

[note]
name = "test pluck"
f0_hz = 146.832
length_s = 4.0
inharmonicity_b = 2.1e-4
gain_db = 0.0

[source]
file = "pluck.wav"
sample_rate_hz = 48000
onset_s = 0.512

[source.analysis]
window = "blackman-harris"
fft_size = 8192
window_s = 0.085
hop_s = 0.005

[[partial]]
freq_hz = 146.901
harmonic = 1
phase_rad = 1.2301
attack_s = 0.004
peak_db = -12.0
decay = [ { t60_s = 1.9, until_s = 0.8 }, { t60_s = 6.4 } ]

[[partial]]
freq_hz = 293.9
harmonic = 2
phase_rad = -0.5
attack_s = 0.003
peak_db = -18.0
decay = [ { t60_s = 1.2, until_s = 0.5 }, { t60_s = 2.5, until_s = 1.5 }, { t60_s = 4.0 } ]

[[noise]]
low_hz = 1000.0
high_hz = 4000.0
attack_s = 0.0005
peak_db = -40.0
decay = [ { t60_s = 0.08 } ]
)";

/// 1-based line of the first occurrence of needle, as ":N:" (the form in messages).
inline std::string line_tag(const std::string& text, const std::string& needle) {
    const std::size_t at = text.find(needle);
    REQUIRE(at != std::string::npos);
    std::string tag(1, ':');  // built by appends: GCC 12 warns falsely (-Wrestrict) on ":" + string
    tag += std::to_string(std::count(text.begin(), text.begin() + static_cast<long>(at), '\n') + 1);
    tag += ':';
    return tag;
}

inline std::string error_of(const std::string& text) { return error_of(text, "pluck.toml"); }

/// Expects the text to be refused with a message naming the file, the line of `line_of` and `key`.
inline void expect_error(const std::string& text, const std::string& line_of, const std::string& key,
                  const std::string& words = "") {
    const std::string msg = error_of(text);
    const std::string tag = line_tag(text, line_of);
    INFO("message: " << msg);
    CAPTURE(tag, key, words);
    REQUIRE_FALSE(msg.empty());
    CHECK_THAT(msg, Catch::Matchers::StartsWith("pluck.toml" + tag));
    CHECK_THAT(msg, Catch::Matchers::Contains(key));
    if (!words.empty()) CHECK_THAT(msg, Catch::Matchers::Contains(words));
}

}  // namespace wane::test

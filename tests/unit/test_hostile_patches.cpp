// Hostile patches: a patch file is untrusted input. Each case must give a clear patch_error
// (naming the line and key where there is one) with a bounded number of bytes allocated (counted
// through operator new: tests/unit/allocation_count.hpp), never a crash.
#include <catch2/catch.hpp>

#include <string>

#include "allocation_count.hpp"
#include "core/rng.hpp"
#include "io/errors.hpp"
#include "io/patch_toml.hpp"

using Catch::Matchers::Contains;

namespace {

constexpr const char* good_head = R"(format = "wane-patch"
version = 1

[note]
name = "hostile"
f0_hz = 220.0
length_s = 2.0
inharmonicity_b = 0.0
gain_db = 0.0

[source]
file = "x.wav"
sample_rate_hz = 48000
onset_s = 0.0
)";

std::string partial_text(const std::string& freq = "220.0", const std::string& peak = "-12.0",
                         const std::string& t60 = "1.5", const std::string& attack = "0.002") {
    return "\n[[partial]]\nfreq_hz = " + freq + "\nharmonic = 1\nphase_rad = 0.0\nattack_s = " + attack +
           "\npeak_db = " + peak + "\ndecay = [ { t60_s = " + t60 + " } ]\n";
}

/// Most bytes one refusal may allocate (through operator new; counted, not timed): far more than a
/// valid patch's tree, far less than a reader that walked a hostile structure.
constexpr std::size_t max_refusal_bytes = std::size_t{1} << 30;

/// Parses text, expects a patch_error whose message contains `expect`; checks the bytes allocated.
void expect_rejected(const std::string& text, const std::string& expect) {
    const wane::test::allocation_peak_scope counted;
    std::string message;
    try {
        (void)wane::parse_patch(text, "hostile.toml");
    } catch (const wane::patch_error& e) {
        message = e.what();
    }
    const std::size_t allocated_bytes = counted.peak_bytes();
    INFO("message: " << message);
    CAPTURE(allocated_bytes, text.size(), expect);
    REQUIRE_FALSE(message.empty());
    CHECK_THAT(message, Contains("hostile.toml"));
    CHECK_THAT(message, Contains(expect));
    CHECK(allocated_bytes < max_refusal_bytes);
}

}  // namespace

TEST_CASE("a well-formed hostile-test base patch is accepted", "[hostile]") {
    // Guards the cases below: they fail for the reason they name, not because the base is bad.
    const auto result = wane::parse_patch(good_head + partial_text(), "hostile.toml");
    CHECK(result.value.partials.size() == 1);
}

TEST_CASE("huge and tiny numbers are refused", "[hostile]") {
    expect_rejected(good_head + partial_text("1e308"), "freq_hz");
    expect_rejected(good_head + partial_text("220.0", "1e300"), "peak_db");
    expect_rejected(good_head + partial_text("220.0", "-12.0", "1e-300"), "t60_s");
    expect_rejected(good_head + partial_text("1e-300"), "freq_hz");
    expect_rejected(good_head + partial_text("220.0", "-12.0", "1.5", "1e300"), "attack_s");
}

TEST_CASE("inf and nan are refused where they make no sense", "[hostile]") {
    expect_rejected(good_head + partial_text("inf"), "freq_hz");
    expect_rejected(good_head + partial_text("nan"), "freq_hz");
    expect_rejected(good_head + partial_text("220.0", "nan"), "peak_db");
    expect_rejected(good_head + partial_text("220.0", "-12.0", "nan"), "t60_s");
    expect_rejected(good_head + partial_text("220.0", "-inf"), "peak_db");
}

TEST_CASE("a 1 MB string is refused", "[hostile]") {
    std::string text = good_head;
    const std::string big(1 << 20, 'x');
    text.replace(text.find("\"hostile\""), 9, "\"" + big + "\"");
    expect_rejected(text + partial_text(), "name");
}

TEST_CASE("deeply nested tables and arrays are refused", "[hostile]") {
    std::string nested = "decay = ";
    for (int i = 0; i < 5000; ++i) nested += "[";
    expect_rejected(std::string(good_head) + "\n[[partial]]\nfreq_hz = 1.0\n" + nested + "\n", "hostile.toml");
    std::string dotted = "\n[note.a";
    for (int i = 0; i < 5000; ++i) dotted += ".a";
    expect_rejected(good_head + dotted + "]\n", "hostile.toml");
}

TEST_CASE("100 000 partials are refused", "[hostile]") {
    std::string text = good_head;
    text.reserve(text.size() + std::size_t{100000} * 140);
    for (int i = 0; i < 100000; ++i) text += partial_text(std::to_string(100 + i % 1000));
    expect_rejected(text, "4096");
}

TEST_CASE("duplicate keys are refused with their line", "[hostile]") {
    std::string head = good_head;
    head.insert(head.find("gain_db = 0.0") , "f0_hz = 3.0\n");
    expect_rejected(head + partial_text(), "f0_hz");
    std::string dup = partial_text();
    dup.insert(dup.find("harmonic"), "freq_hz = 330.0\n");
    expect_rejected(good_head + dup, "freq_hz");
}

TEST_CASE("wrong types everywhere are refused naming the key", "[hostile]") {
    const char* keys[] = {"freq_hz", "harmonic", "phase_rad", "attack_s", "peak_db"};
    for (const char* key : keys) {
        std::string text = good_head + partial_text();
        const auto at = text.find(std::string(key) + " = ");
        const auto eol = text.find('\n', at);
        text.replace(at, eol - at, std::string(key) + " = \"text\"");
        expect_rejected(text, key);
    }
    std::string text = good_head + partial_text();
    text.replace(text.find("length_s = 2.0"), 14, "length_s = [1, 2]");
    expect_rejected(text, "length_s");
    text = good_head + partial_text();
    text.replace(text.find("decay = ["), 9, "decay = 3 #[");
    expect_rejected(text, "decay");
}

TEST_CASE("an unterminated file is refused", "[hostile]") {
    expect_rejected(std::string(good_head) + "\n[[partial]]\nfreq_hz = 220.0\ndecay = [ { t60_s = 1.5 ", "hostile.toml:");
    expect_rejected(std::string(good_head) + "\n[note\n", "hostile.toml:");
    expect_rejected("format = \"wane-patch", "hostile.toml:");
}

TEST_CASE("binary garbage is refused", "[hostile]") {
    std::string garbage(4096, '\0');
    wane::splitmix64 rng{wane::splitmix64_gamma};  // fixed seed (core/rng.hpp)
    for (char& c : garbage) c = static_cast<char>(rng.next() >> 56);
    expect_rejected(garbage, "hostile.toml");
    expect_rejected(std::string("\x89PNG\r\n\x1a\n", 8) + garbage, "hostile.toml");
}

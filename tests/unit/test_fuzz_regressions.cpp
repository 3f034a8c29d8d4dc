// Replays the fuzz seed corpus and every kept fuzz finding (tests/fuzz/) through the readers:
// each file must be accepted or rejected with the reader's own error type, never crash.
#include <catch2/catch.hpp>

#include <filesystem>
#include <fstream>
#include <sstream>

#include "io/audio_file.hpp"
#include "io/errors.hpp"
#include "io/patch_toml.hpp"

namespace fs = std::filesystem;

namespace {
std::vector<fs::path> files_in(const std::vector<std::string>& folders) {
    std::vector<fs::path> out;
    for (const std::string& f : folders) {
        const fs::path dir = fs::path(WANE_SOURCE_DIR) / "tests/fuzz" / f;
        if (!fs::is_directory(dir)) continue;
        for (const auto& e : fs::directory_iterator(dir)) {
            if (e.is_regular_file() && e.path().filename().string()[0] != '.') out.push_back(e.path());
        }
    }
    std::sort(out.begin(), out.end());
    return out;
}
}  // namespace

TEST_CASE("patch corpus and findings are accepted or rejected cleanly", "[fuzz]") {
    const auto files = files_in({"corpus/patch", "regressions/patch"});
    REQUIRE(!files.empty());
    for (const fs::path& f : files) {
        std::ifstream in(f, std::ios::binary);
        std::stringstream ss;
        ss << in.rdbuf();
        INFO(f.string());
        bool clean = false;
        try {
            const auto r = wane::parse_patch(ss.str(), f.filename().string());
            CHECK(wane::parse_patch(wane::format_patch(r.value), "again").value == r.value);
            clean = true;
        } catch (const wane::patch_error&) {
            clean = true;
        }
        CHECK(clean);
    }
}

TEST_CASE("audio corpus and findings are accepted or rejected cleanly", "[fuzz]") {
    const auto files = files_in({"corpus/audio", "regressions/audio"});
    REQUIRE(!files.empty());
    for (const fs::path& f : files) {
        INFO(f.string());
        bool clean = false;
        try {
            const auto a = wane::read_audio(f, {.max_length_s = 60.0});
            CHECK(a.sample_rate_hz > 0.0);
            clean = true;
        } catch (const wane::io_error&) {
            clean = true;
        }
        CHECK(clean);
    }
}

// Audio I/O at the edge, what it refuses: every bad input the reader and writer must turn into one
// io_error naming the file (WAV bytes assembled by hand from the RIFF layout), and a failed write
// that leaves nothing behind.
#include <catch2/catch.hpp>

#include <cstdint>
#include <filesystem>
#include <limits>
#include <set>
#include <string>
#include <vector>

#include "io/audio_file.hpp"
#include "io/errors.hpp"
#include "test_support.hpp"
#include "wav_bytes.hpp"

using Catch::Matchers::Contains;
using namespace wane;
using namespace wane::test;
namespace fs = std::filesystem;

namespace {

/// The message read_audio throws for a file ("" when it does not throw io_error).
std::string read_error(const fs::path& p, const audio_read_options& opt = {}) {
    try {
        (void)read_audio(p, opt);
    } catch (const io_error& e) {
        return e.what();
    }
    return "";
}
std::string write_error(const fs::path& p, const std::vector<float>& x, double rate_hz,
                        const audio_write_options& opt = {}) {
    try {
        write_audio(p, x, rate_hz, opt);
    } catch (const io_error& e) {
        return e.what();
    }
    return "";
}

}  // namespace

TEST_CASE("bad inputs give an io_error naming the file", "[audio_io]") {
    wane::test::scratch_dir dir{"audio_io"};
    // A valid 1000-frame 16-bit mono WAV at 48 kHz, and a stereo one.
    std::vector<int> ramp;
    ramp.reserve(1000);
    for (int i = 0; i < 1000; ++i) ramp.push_back(i * 16 - 8000);
    const std::string good = wav_bytes(1, 1, 48000, 16, pcm16_data(ramp));
    write_bytes(dir / "good.wav", good);
    REQUIRE(read_audio(dir / "good.wav").samples.size() == 1000);

    struct bad_case {
        std::string name;
        std::string expect;  // part of the message
        audio_read_options options;
    };
    std::vector<bad_case> cases;

    cases.push_back({"missing.wav", "no such file", {}});
    fs::create_directory(dir / "folder.wav");
    cases.push_back({"folder.wav", "directory", {}});
    write_bytes(dir / "text.wav", "This is not audio, just some words in a text file.\n");
    cases.push_back({"text.wav", "not a readable audio file", {}});
    write_bytes(dir / "empty.wav", "");
    cases.push_back({"empty.wav", "empty", {}});
    write_bytes(dir / "no_frames.wav", wav_bytes(1, 1, 48000, 16, ""));
    cases.push_back({"no_frames.wav", "zero", {}});
    write_bytes(dir / "truncated.wav", good.substr(0, 44 + 1000));  // half the data chunk
    cases.push_back({"truncated.wav", "truncated", {}});
    std::vector<float> with_nan(100, 0.25f);
    with_nan[37] = std::numeric_limits<float>::quiet_NaN();
    write_bytes(dir / "nan.wav", wav_bytes(3, 1, 48000, 32, float_data(with_nan)));
    cases.push_back({"nan.wav", "NaN sample at frame 37", {}});
    std::vector<float> with_inf(100, -0.25f);
    with_inf[90] = -std::numeric_limits<float>::infinity();
    write_bytes(dir / "inf.wav", wav_bytes(3, 1, 48000, 32, float_data(with_inf)));
    cases.push_back({"inf.wav", "infinite sample at frame 90", {}});
    std::string fast = good;
    const std::uint32_t rate_1e9 = 1000000000u;
    for (int i = 0; i < 4; ++i) fast[wav_rate_offset + static_cast<std::size_t>(i)] = static_cast<char>((rate_1e9 >> (8 * i)) & 0xFF);
    write_bytes(dir / "fast.wav", fast);
    cases.push_back({"fast.wav", "1000000000 Hz", {}});
    write_bytes(dir / "stereo.wav", wav_bytes(1, 2, 48000, 16, pcm16_data(ramp)));
    cases.push_back({"stereo.wav", "--channel 3 but file has 2 channels", {.channel = 3}});
    cases.push_back({"stereo.wav", "--channel 0 but file has 2 channels", {.channel = 0}});
    cases.push_back({"good.wav", "--channel 2 but file has 1 channel", {.channel = 2}});
    // 1000 frames at 48 kHz is 20.8 ms.
    cases.push_back({"good.wav", "0.01 s limit", {.max_length_s = 0.01}});

    // Truncated AIFF and FLAC (written here, then cut in half).
    std::vector<float> tone(20000);
    for (std::size_t i = 0; i < tone.size(); ++i) tone[i] = static_cast<float>(0.5 * std::sin(0.05 * static_cast<double>(i)));
    for (const std::string ext : {".aiff", ".flac"}) {
        write_audio(dir / ("whole" + ext), tone, 48000.0);
        const std::string whole = read_bytes(dir / ("whole" + ext));
        write_bytes(dir / ("cut" + ext), whole.substr(0, whole.size() / 2));
        cases.push_back({"cut" + ext, "truncated", {}});
    }

    for (const bad_case& c : cases) {
        const fs::path p = dir / c.name;
        const std::string msg = read_error(p, c.options);
        INFO("file " << c.name << ": message '" << msg << "'");
        CHECK_THAT(msg, Contains(p.string()));
        CHECK_THAT(msg, Contains(c.expect));
        CHECK(msg.find('\n') == std::string::npos);  // one line
    }
    // A 20 ms file under a 20 ms limit is fine; the limit is named when exceeded.
    CHECK(read_audio(dir / "good.wav", {.max_length_s = 0.021}).samples.size() == 1000);
    CHECK_THAT(read_error(dir / "good.wav", {.max_length_s = 0.02}), Contains("0.02 s limit"));
    // libsndfile's own reason is passed on for non-audio.
    CHECK(read_error(dir / "text.wav").size() > (dir / "text.wav").string().size() + 30);
    // read_root_midi names the file too.
    CHECK_THROWS_WITH(read_root_midi(dir / "text.wav"), Contains((dir / "text.wav").string()));
}

TEST_CASE("a failed write names the path and leaves nothing behind", "[audio_io]") {
    wane::test::scratch_dir dir{"audio_io"};
    fs::create_directory(dir / "out");
    write_bytes(dir / "a_file", "x");
    const fs::path out = dir / "out";
    const std::vector<float> ok(1000, 0.5f);
    std::vector<float> hot(1000, 0.5f);
    hot[500] = -1.5f;  // 20 log10(1.5) = +3.52 dBFS
    std::vector<float> nan(1000, 0.5f);
    nan[3] = std::numeric_limits<float>::quiet_NaN();

    struct bad_write {
        fs::path path;
        std::vector<float> samples;
        audio_write_options options;
        std::string expect;
    };
    const std::vector<bad_write> cases = {
        {dir / "no" / "such" / "folder" / "x.wav", ok, {}, "does not exist"},
        {dir / "a_file" / "x.wav", ok, {}, "is not a folder"},
        {out / "x.mp3", ok, {}, "'.mp3'"},
        {out / "x", ok, {}, "extension ''"},
        {out / "x.flac", ok, {.format = sample_format::float32}, "FLAC"},
        {out / "hot.wav", hot, {}, "+3.52 dBFS"},
        {out / "hot.flac", hot, {.format = sample_format::pcm16}, "+3.52 dBFS"},
        {out / "nan.wav", nan, {.format = sample_format::float32}, "NaN"},
        {out / "root.wav", ok, {.root_midi = 200}, "200"},
        {out / "empty.wav", {}, {}, "no samples"},
    };
    for (const bad_write& c : cases) {
        const std::string msg = write_error(c.path, c.samples, 48000.0, c.options);
        INFO("path " << c.path << ": message '" << msg << "'");
        CHECK_THAT(msg, Contains(c.path.string()));
        CHECK_THAT(msg, Contains(c.expect));
        CHECK_FALSE(fs::exists(c.path));
    }
    // An existing folder nobody can create files in, even root: procfs.
    if (fs::is_directory("/proc/self")) {
        const std::string msg = write_error("/proc/self/wane_test.wav", ok, 48000.0);
        CAPTURE(msg);
        CHECK_THAT(msg, Contains("/proc/self/wane_test.wav") && Contains("cannot write"));
    }
    CHECK_THAT(write_error(out / "rate.wav", ok, 44100.5), Contains("44100.5"));
    CHECK_THAT(write_error(out / "rate.wav", ok, 1e9), Contains("768 kHz"));
    CHECK(entries(out).empty());                                              // no temp files either
    CHECK(entries(dir.path) == std::set<std::string>{"a_file", "out"});  // nothing created above

    // A sample of exactly full scale is not an error (the last guard is for > 1 only).
    write_audio(out / "full.wav", std::vector<float>{1.0f, -1.0f}, 48000.0, {.format = sample_format::pcm24});
    CHECK(read_audio(out / "full.wav").samples == std::vector<float>{8388607.0f / 8388608.0f, -1.0f});
    // Overwriting an existing output replaces it atomically and leaves no temp file.
    write_audio(out / "full.wav", ok, 48000.0);
    CHECK(read_audio(out / "full.wav").samples.size() == ok.size());
    CHECK(entries(out) == std::set<std::string>{"full.wav"});
}

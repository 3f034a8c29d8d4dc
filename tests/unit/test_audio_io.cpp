// Audio I/O at the edge: round trips against exact ground truth, files from an independent writer
// (sox, and WAV bytes assembled here by hand from the RIFF layout), sox as an independent reader,
// FFTW as the reference FFT (the bad inputs it refuses: test_audio_errors.cpp).
#include <catch2/catch.hpp>

#include <fftw3.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstdlib>
#include <filesystem>
#include <limits>
#include <set>
#include <string>
#include <vector>

#include "core/units.hpp"
#include "io/audio_file.hpp"
#include "io/errors.hpp"
#include "test_support.hpp"
#include "wav_bytes.hpp"

using Catch::Matchers::Contains;
using Catch::Matchers::WithinAbs;
using namespace wane;
using namespace wane::test;
namespace fs = std::filesystem;

namespace {

/// Deterministic integers for test signals (xorshift32, Marsaglia 2003), fixed seed.
struct test_rng {
    std::uint32_t state = 2463534242u;
    std::uint32_t next() {
        state ^= state << 13;
        state ^= state >> 17;
        state ^= state << 5;
        return state;
    }
};

/// Samples of sox's decode of a file as signed 32-bit integers (sox: an independent reader).
std::vector<std::int32_t> sox_decode_s32(const fs::path& file, const fs::path& raw) {
    const std::string cmd = "sox '" + file.string() + "' -t raw -e signed-integer -b 32 -L '" + raw.string() + "'";
    REQUIRE(std::system(cmd.c_str()) == 0);
    const std::string bytes = read_bytes(raw);
    std::vector<std::int32_t> out(bytes.size() / 4);
    for (std::size_t i = 0; i < out.size(); ++i) {
        const auto* b = reinterpret_cast<const unsigned char*>(bytes.data() + 4 * i);
        const std::uint32_t u = static_cast<std::uint32_t>(b[0]) | (static_cast<std::uint32_t>(b[1]) << 8) |
                                (static_cast<std::uint32_t>(b[2]) << 16) | (static_cast<std::uint32_t>(b[3]) << 24);
        out[i] = static_cast<std::int32_t>(u);
    }
    return out;
}

/// FFTW r2c magnitude spectrum of x (length n / 2 + 1).
std::vector<double> fftw_magnitude(const std::vector<double>& x) {
    const int n = static_cast<int>(x.size());
    std::vector<double> in(x);
    auto* out = static_cast<fftw_complex*>(fftw_malloc(sizeof(fftw_complex) * static_cast<std::size_t>(n / 2 + 1)));
    fftw_plan plan = fftw_plan_dft_r2c_1d(n, in.data(), out, FFTW_ESTIMATE);
    fftw_execute(plan);
    std::vector<double> mag(static_cast<std::size_t>(n / 2 + 1));
    for (std::size_t k = 0; k < mag.size(); ++k) mag[k] = std::hypot(out[k][0], out[k][1]);
    fftw_destroy_plan(plan);
    fftw_free(out);
    return mag;
}

std::size_t argmax(const std::vector<double>& v) {
    return static_cast<std::size_t>(std::max_element(v.begin(), v.end()) - v.begin());
}

}  // namespace

TEST_CASE("PCM round trip is bit-exact in WAV, AIFF and FLAC at 16 and 24 bits", "[audio_io]") {
    const std::string ext = GENERATE(as<std::string>{}, ".wav", ".aiff", ".aif", ".flac");
    const int bits = GENERATE(16, 24);
    CAPTURE(ext, bits);
    wane::test::scratch_dir dir{"audio_io"};
    const double full_scale = bits == 16 ? 32768.0 : 8388608.0;
    const auto top = static_cast<std::int64_t>(full_scale);
    // Values on the grid, covering both extremes and zero (exact ground truth).
    test_rng rng;
    std::vector<std::int64_t> steps = {-top, top - 1, 0, 1, -1};
    for (int i = 0; i < 5000; ++i) steps.push_back(static_cast<std::int64_t>(rng.next() % (2 * top)) - top);
    std::vector<float> x;
    x.reserve(steps.size());
    for (auto k : steps) x.push_back(static_cast<float>(static_cast<double>(k) / full_scale));

    const fs::path file = dir / ("grid" + ext);
    write_audio(file, x, 44100.0,
                {.format = bits == 16 ? sample_format::pcm16 : sample_format::pcm24, .dither = false});
    const mono_audio back = read_audio(file);
    CHECK(back.sample_rate_hz == 44100.0);
    CHECK(back.source_channels == 1);
    REQUIRE(back.samples.size() == x.size());
    std::size_t mismatches = 0;
    for (std::size_t i = 0; i < x.size(); ++i) mismatches += back.samples[i] != x[i] ? 1 : 0;
    CHECK(mismatches == 0);

    // sox, an independent reader, sees the same integers (scaled to 32 bits).
    const std::vector<std::int32_t> by_sox = sox_decode_s32(file, dir / "sox.raw");
    REQUIRE(by_sox.size() == steps.size());
    const int shift = 32 - bits;
    std::size_t sox_mismatches = 0;
    for (std::size_t i = 0; i < steps.size(); ++i) {
        sox_mismatches += static_cast<std::int64_t>(by_sox[i]) != steps[i] * (std::int64_t{1} << shift) ? 1 : 0;
    }
    CHECK(sox_mismatches == 0);
    // Nothing else is left in the folder (no temporary files).
    CHECK(entries(dir.path) == std::set<std::string>{"grid" + ext, "sox.raw"});
}

TEST_CASE("float32 round trip is exact in WAV and AIFF", "[audio_io]") {
    const std::string ext = GENERATE(as<std::string>{}, ".wav", ".aiff");
    CAPTURE(ext);
    wane::test::scratch_dir dir{"audio_io"};
    test_rng rng;
    std::vector<float> x = {1.0f, -1.0f, 0.0f, std::numeric_limits<float>::min(), 1e-30f};
    for (int i = 0; i < 5000; ++i) {
        x.push_back(static_cast<float>(static_cast<double>(rng.next()) / 4294967296.0 * 2.0 - 1.0));
    }
    const fs::path file = dir / ("f" + ext);
    write_audio(file, x, 96000.0, {.format = sample_format::float32});
    const mono_audio back = read_audio(file);
    CHECK(back.sample_rate_hz == 96000.0);
    REQUIRE(back.samples.size() == x.size());
    std::size_t mismatches = 0;
    for (std::size_t i = 0; i < x.size(); ++i) mismatches += back.samples[i] != x[i] ? 1 : 0;
    CHECK(mismatches == 0);
}

TEST_CASE("16-bit TPDF dither: grid values move at most 1 LSB, error moments as published", "[audio_io]") {
    wane::test::scratch_dir dir{"audio_io"};
    constexpr double lsb = 1.0 / 32768.0;
    // Grid values: dither of two uniform +-0.5 LSB values sums to (-1, 1) LSB, so after rounding
    // a value on the grid lands on itself or a neighbour.
    std::vector<float> grid;
    for (int k = -2000; k <= 2000; ++k) grid.push_back(static_cast<float>(k * 7 * lsb));
    write_audio(dir / "grid.wav", grid, 48000.0, {.format = sample_format::pcm16});
    const mono_audio g = read_audio(dir / "grid.wav");
    REQUIRE(g.samples.size() == grid.size());
    double worst_lsb = 0.0;
    std::size_t moved = 0;
    for (std::size_t i = 0; i < grid.size(); ++i) {
        const double d = std::fabs(static_cast<double>(g.samples[i]) - static_cast<double>(grid[i])) / lsb;
        worst_lsb = std::max(worst_lsb, d);
        moved += d > 0.0 ? 1 : 0;
    }
    CAPTURE(worst_lsb, moved);
    CHECK(worst_lsb <= 1.0);
    CHECK(moved > 0);  // dither is really applied

    // A constant 0.3 LSB off the grid: with TPDF dither the total error has mean 0 and power
    // Delta^2/12 (rounding) + 2 Delta^2/12 (dither) = Delta^2/4, independent of the signal
    // (Lipshitz, Wannamaker, Vanderkooy 1992, J. AES 40(5), from memory).
    constexpr std::size_t n = 100000;
    const double value_lsb = 1000.3;
    const std::vector<float> c(n, static_cast<float>(value_lsb * lsb));
    const double stored_lsb = static_cast<double>(c[0]) / lsb;  // the float nearest 1000.3 LSB
    write_audio(dir / "const.wav", c, 48000.0, {.format = sample_format::pcm16, .dither_seed = 12345});
    const mono_audio back = read_audio(dir / "const.wav");
    REQUIRE(back.samples.size() == n);
    double sum = 0.0, sum_sq = 0.0, worst = 0.0;
    for (float s : back.samples) {
        const double e = static_cast<double>(s) / lsb - stored_lsb;
        sum += e;
        sum_sq += e * e;
        worst = std::max(worst, std::fabs(e));
    }
    const double mean_lsb = sum / static_cast<double>(n);
    const double power_lsb2 = sum_sq / static_cast<double>(n);
    CAPTURE(mean_lsb, power_lsb2, worst);
    CHECK_THAT(mean_lsb, WithinAbs(0.0, 0.01));     // ~6 standard errors at n = 1e5
    CHECK_THAT(power_lsb2, WithinAbs(0.25, 0.01));  // ~6 standard errors at n = 1e5
    CHECK(worst <= 1.5);

    // Deterministic: the same seed gives the same bytes, another seed different ones.
    write_audio(dir / "again.wav", c, 48000.0, {.format = sample_format::pcm16, .dither_seed = 12345});
    write_audio(dir / "other.wav", c, 48000.0, {.format = sample_format::pcm16, .dither_seed = 54321});
    CHECK(read_bytes(dir / "again.wav") == read_bytes(dir / "const.wav"));
    CHECK(read_bytes(dir / "other.wav") != read_bytes(dir / "const.wav"));
}

TEST_CASE("24-bit rounds to the nearest step", "[audio_io]") {
    wane::test::scratch_dir dir{"audio_io"};
    constexpr double lsb = 1.0 / 8388608.0;
    // k + 0.25 and k - 0.3 steps: nearest is k (exact ground truth).
    std::vector<float> x;
    std::vector<double> expect;
    for (int k = -1000; k <= 1000; k += 10) {
        x.push_back(static_cast<float>((k + 0.25) * lsb));
        expect.push_back(k * lsb);
        x.push_back(static_cast<float>((k - 0.3) * lsb));
        expect.push_back(k * lsb);
    }
    write_audio(dir / "r.wav", x, 48000.0, {.format = sample_format::pcm24});
    const mono_audio back = read_audio(dir / "r.wav");
    REQUIRE(back.samples.size() == x.size());
    std::size_t mismatches = 0;
    for (std::size_t i = 0; i < x.size(); ++i) mismatches += static_cast<double>(back.samples[i]) != expect[i] ? 1 : 0;
    CHECK(mismatches == 0);
}

TEST_CASE("the root note is stored and read back (WAV, AIFF)", "[audio_io]") {
    const std::string ext = GENERATE(as<std::string>{}, ".wav", ".aiff");
    CAPTURE(ext);
    wane::test::scratch_dir dir{"audio_io"};
    // 1001 frames of 24 bits: an odd-length sample chunk, so the AIFF INST chunk needs a pad byte.
    const std::vector<float> x(1001, 0.25f);
    write_audio(dir / ("with" + ext), x, 48000.0, {.root_midi = 62});
    write_audio(dir / ("without" + ext), x, 48000.0, {});
    CHECK(read_root_midi(dir / ("with" + ext)) == std::optional<int>(62));
    CHECK_FALSE(read_root_midi(dir / ("without" + ext)).has_value());
    // The samples are unaffected by the extra chunk, for us and for sox (an independent reader).
    CHECK(read_audio(dir / ("with" + ext)).samples == read_audio(dir / ("without" + ext)).samples);
    const std::vector<std::int32_t> by_sox = sox_decode_s32(dir / ("with" + ext), dir / "sox.raw");
    REQUIRE(by_sox.size() == x.size());
    CHECK(std::all_of(by_sox.begin(), by_sox.end(), [](std::int32_t v) { return v == (1 << 29); }));
}

TEST_CASE("a 24-bit WAVE_FORMAT_EXTENSIBLE file written by sox reads back", "[audio_io]") {
    wane::test::scratch_dir dir{"audio_io"};
    const fs::path file = dir / "t.wav";
    const std::string cmd = "sox -n -r 48000 -b 24 '" + file.string() + "' synth 1 sine 1000";
    REQUIRE(std::system(cmd.c_str()) == 0);
    // The header really is extensible: format tag 0xFFFE at byte 20 (RIFF WAVE layout).
    const std::string bytes = read_bytes(file);
    REQUIRE(bytes.size() > 22);
    CHECK(static_cast<unsigned char>(bytes[20]) == 0xFE);
    CHECK(static_cast<unsigned char>(bytes[21]) == 0xFF);

    const mono_audio a = read_audio(file);
    CHECK(a.sample_rate_hz == 48000.0);
    CHECK(a.samples.size() == 48000);
    CHECK(a.source_channels == 1);
    CHECK_THAT(a.format_name, Contains("24"));
    // 48000 frames at 48 kHz: FFT bins are 1 Hz apart, so the peak is bin 1000.
    const std::vector<double> x(a.samples.begin(), a.samples.end());
    const std::vector<double> mag = fftw_magnitude(x);
    const std::size_t peak_bin = argmax(mag);
    CAPTURE(peak_bin, mag[peak_bin]);
    CHECK(peak_bin == 1000);
}

TEST_CASE("other formats: 8-bit, 32-bit int, OGG Vorbis, multichannel mixing", "[audio_io]") {
    wane::test::scratch_dir dir{"audio_io"};
    SECTION("8-bit unsigned WAV: v reads as (v - 128) / 128") {
        const std::string data = {static_cast<char>(0), static_cast<char>(128), static_cast<char>(255),
                                  static_cast<char>(192)};
        write_bytes(dir / "u8.wav", wav_bytes(1, 1, 8000, 8, data));
        const mono_audio a = read_audio(dir / "u8.wav");
        CHECK(a.samples == std::vector<float>{-1.0f, 0.0f, 127.0f / 128.0f, 0.5f});
    }
    SECTION("32-bit integer WAV: k reads as k / 2^31") {
        std::string data;
        for (std::uint32_t v : {0x40000000u, 0xC0000000u, 0x00000100u}) put_u32(data, v);
        write_bytes(dir / "s32.wav", wav_bytes(1, 1, 8000, 32, data));
        const mono_audio a = read_audio(dir / "s32.wav");
        CHECK(a.samples == std::vector<float>{0.5f, -0.5f, 256.0f / 2147483648.0f});
    }
    SECTION("stereo: mean by default, or the chosen channel") {
        // Frames (L, R): (1000, 3000), (-400, 0), (32767, -32768)
        write_bytes(dir / "st.wav", wav_bytes(1, 2, 44100, 16, pcm16_data({1000, 3000, -400, 0, 32767, -32768})));
        const mono_audio mix = read_audio(dir / "st.wav");
        CHECK(mix.source_channels == 2);
        CHECK(mix.samples == std::vector<float>{2000.0f / 32768.0f, -200.0f / 32768.0f, -0.5f / 32768.0f});
        const mono_audio right = read_audio(dir / "st.wav", {.channel = 2});
        CHECK(right.samples == std::vector<float>{3000.0f / 32768.0f, 0.0f, -1.0f});
        const mono_audio left = read_audio(dir / "st.wav", {.channel = 1});
        CHECK(left.samples == std::vector<float>{1000.0f / 32768.0f, -400.0f / 32768.0f, 32767.0f / 32768.0f});
    }
    SECTION("64 channels over several read blocks: the mean of all channels, or one channel") {
        // Frame f, channel c (0-based) holds (f % 100) * 8 + c, so the mean is (f % 100) * 8 + 31.5.
        constexpr int channels = 64, frames = 5000;
        std::vector<int> values;
        for (int f = 0; f < frames; ++f) {
            for (int c = 0; c < channels; ++c) values.push_back((f % 100) * 8 + c);
        }
        write_bytes(dir / "many.wav", wav_bytes(1, channels, 48000, 16, pcm16_data(values)));
        const mono_audio mix = read_audio(dir / "many.wav");
        const mono_audio ch40 = read_audio(dir / "many.wav", {.channel = 40});
        CHECK(mix.source_channels == channels);
        REQUIRE(mix.samples.size() == frames);
        REQUIRE(ch40.samples.size() == frames);
        std::size_t mix_bad = 0, ch_bad = 0;
        for (int f = 0; f < frames; ++f) {
            const auto i = static_cast<std::size_t>(f);
            mix_bad += mix.samples[i] != static_cast<float>(((f % 100) * 8 + 31.5) / 32768.0) ? 1 : 0;
            ch_bad += ch40.samples[i] != static_cast<float>(((f % 100) * 8 + 39) / 32768.0) ? 1 : 0;
        }
        CHECK(mix_bad == 0);
        CHECK(ch_bad == 0);
    }
    SECTION("OGG Vorbis written by sox") {
        const fs::path file = dir / "t.ogg";
        const std::string cmd = "sox -n -r 48000 '" + file.string() + "' synth 1 sine 1000";
        REQUIRE(std::system(cmd.c_str()) == 0);
        const mono_audio a = read_audio(file);
        CHECK(a.sample_rate_hz == 48000.0);
        CHECK_THAT(static_cast<double>(a.samples.size()), WithinAbs(48000.0, 1.0));
        std::vector<double> x(a.samples.begin(), a.samples.end());
        x.resize(48000, 0.0);
        CHECK(argmax(fftw_magnitude(x)) == 1000);
    }
}

TEST_CASE("libsamplerate 44.1 -> 48 kHz keeps a 1 kHz sine's level and frequency", "[audio_io]") {
    constexpr double from_hz = 44100.0, to_hz = 48000.0;
    constexpr double freq_hz = 1000.0, amp = 0.5, length_s = 2.0;
    const auto n_in = static_cast<std::size_t>(from_hz * length_s);
    std::vector<float> in(n_in);
    for (std::size_t i = 0; i < n_in; ++i) {
        in[i] = static_cast<float>(amp * std::sin(two_pi * freq_hz * static_cast<double>(i) / from_hz));
    }
    const std::vector<float> out = resample(in, from_hz, to_hz);
    REQUIRE(out.size() == 96000);  // round(88200 * 48000 / 44100)

    // Away from the edges: 0.2 s .. 1.8 s.
    const auto first = static_cast<std::size_t>(0.2 * to_hz);
    const auto count = static_cast<std::size_t>(1.6 * to_hz);
    // Frequency: Hann window, zero padded to 2^21 (about 27x), FFTW, parabolic interpolation
    // of the log magnitude around the peak.
    constexpr std::size_t fft_len = std::size_t{1} << 21;
    std::vector<double> x(fft_len, 0.0);
    for (std::size_t i = 0; i < count; ++i) {
        const double w = 0.5 - 0.5 * std::cos(two_pi * static_cast<double>(i) / static_cast<double>(count - 1));
        x[i] = w * static_cast<double>(out[first + i]);
    }
    const std::vector<double> mag = fftw_magnitude(x);
    const std::size_t k = argmax(mag);
    const double a = std::log(mag[k - 1]), b = std::log(mag[k]), c = std::log(mag[k + 1]);
    const double offset = 0.5 * (a - c) / (a - 2.0 * b + c);
    const double measured_hz = (static_cast<double>(k) + offset) * to_hz / static_cast<double>(fft_len);
    // Level: least-squares fit of A cos + B sin at the measured frequency.
    double cc = 0, ss = 0, cs = 0, xc = 0, xs = 0;
    for (std::size_t i = first; i < first + count; ++i) {
        const double ph = two_pi * measured_hz * static_cast<double>(i) / to_hz;
        const double cv = std::cos(ph), sv = std::sin(ph), v = static_cast<double>(out[i]);
        cc += cv * cv, ss += sv * sv, cs += cv * sv, xc += v * cv, xs += v * sv;
    }
    const double det = cc * ss - cs * cs;
    const double fit_a = (xc * ss - xs * cs) / det, fit_b = (xs * cc - xc * cs) / det;
    const double level_change_db = to_level(amp_lin{std::hypot(fit_a, fit_b) / amp}).db;
    // Residual after removing the fitted sine, relative to the sine's power.
    double resid = 0.0;
    for (std::size_t i = first; i < first + count; ++i) {
        const double ph = two_pi * measured_hz * static_cast<double>(i) / to_hz;
        const double e = static_cast<double>(out[i]) - fit_a * std::cos(ph) - fit_b * std::sin(ph);
        resid += e * e;
    }
    const double resid_db = power_to_db(resid / static_cast<double>(count) / (0.5 * amp * amp));
    CAPTURE(measured_hz, level_change_db, resid_db);
    CHECK_THAT(measured_hz, WithinAbs(freq_hz, 0.01));
    CHECK_THAT(level_change_db, WithinAbs(0.0, 0.01));
    // The fitted sine explains the output to float precision level (common practice bound:
    // well below 16-bit noise, -98 dB).
    CHECK(resid_db < -98.0);

    SECTION("equal rates return the input unchanged") { CHECK(resample(in, from_hz, from_hz) == in); }
    SECTION("48 -> 44.1 kHz length is round(n * ratio)") {
        const std::vector<float> down = resample(std::span<const float>(in).first(48001), to_hz, from_hz);
        CHECK(down.size() == static_cast<std::size_t>(std::llround(48001.0 * from_hz / to_hz)));
    }
}

TEST_CASE("parse_sample_format", "[audio_io]") {
    CHECK(parse_sample_format("16") == sample_format::pcm16);
    CHECK(parse_sample_format("24") == sample_format::pcm24);
    CHECK(parse_sample_format("32f") == sample_format::float32);
    CHECK_FALSE(parse_sample_format("32").has_value());
    CHECK_FALSE(parse_sample_format("").has_value());
    CHECK_FALSE(parse_sample_format("8").has_value());
}

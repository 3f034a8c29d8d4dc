// Tests of keymap planning and the `wane keymap` instrument (src/transform/keymap*): regions that
// tile keys and velocities, the SFZ text, sample names, layer steps and amp_veltrack.
// References: the SFZ opcode grammar (<header> and opcode=value tokens, // comments) and the SFZ
// specification's amp_veltrack curve, libsndfile to read the WAV instrument chunk back.
#include <catch2/catch.hpp>
#include <sndfile.h>

#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <map>
#include <regex>
#include <set>
#include <sstream>
#include <string>
#include <tuple>
#include <vector>

#include "core/patch.hpp"
#include "core/pitch_names.hpp"
#include "io/patch_toml.hpp"
#include "transform/keymap.hpp"
#include "transform/keymap_sfz.hpp"
#include "patch_builders.hpp"
#include "test_support.hpp"

using Catch::Matchers::WithinAbs;
using namespace wane;
using wane::test::harmonic_patch;

// ---------------------------------------------------------------- keymap

namespace {

/// SFZ opcode grammar: a line is empty, a // comment, or tokens each "<header>" or "opcode=value".
bool sfz_line_parses(const std::string& line) {
    static const std::regex token(R"(<[a-z]+>|[a-z_][a-z0-9_]*=[^\s=<>]+)");
    if (line.rfind("//", 0) == 0) return true;
    std::istringstream words(line);
    std::string w;
    while (words >> w) {
        if (!std::regex_match(w, token)) return false;
    }
    return true;
}

/// Checks that jobs tile keys low..high and velocities 1..127 for each variant, without gaps or
/// overlaps: every (key, velocity, variant) cell is covered exactly once.
void check_tiling(const std::vector<keymap_job>& jobs, const keymap_params& params) {
    std::map<std::tuple<int, int, int>, int> cover;
    for (const keymap_job& j : jobs) {
        CHECK(j.lokey <= j.root_midi);
        CHECK(j.root_midi <= j.hikey);
        for (int key = j.lokey; key <= j.hikey; ++key)
            for (int vel = j.lovel; vel <= j.hivel; ++vel) ++cover[{j.variant, key, vel}];
    }
    int wrong = 0;
    for (int r = 1; r <= params.variants; ++r)
        for (int key = params.notes.low_midi; key <= params.notes.high_midi; ++key)
            for (int vel = 1; vel <= 127; ++vel) {
                const auto it = cover.find({r, key, vel});
                if (it == cover.end() || it->second != 1) ++wrong;
            }
    const std::size_t cells = static_cast<std::size_t>(params.variants) *
                              static_cast<std::size_t>(params.notes.high_midi - params.notes.low_midi + 1) * 127;
    CAPTURE(wrong, cover.size(), cells);
    CHECK(wrong == 0);
    CHECK(cover.size() == cells);  // nothing outside the span
}

}  // namespace

TEST_CASE("note ranges parse by name and number, bad ones are refused", "[transform][keymap]") {
    const note_range r = parse_note_range("C2..C6");
    CHECK(r.low_midi == 36);  // scientific pitch: C4 = MIDI 60
    CHECK(r.high_midi == 84);
    const note_range n = parse_note_range("60..F#4");
    CHECK(n.low_midi == 60);
    CHECK(n.high_midi == 66);
    const char* bad = GENERATE("C2-C6", "H2..C6", "C6..C2", "..C4", "C4..", "");
    CAPTURE(bad);
    CHECK_THROWS_AS(parse_note_range(bad), transform_error);
}

TEST_CASE("keymap regions tile keys and velocities, the SFZ text parses", "[transform][keymap]") {
    const int every = GENERATE(1, 2, 3, 5);
    const int layers = GENERATE(1, 3, 4);
    const int variants = GENERATE(1, 2);
    const keymap_params params{.notes = parse_note_range("C2..C6"), .every = every, .layers = layers, .variants = variants};
    const auto jobs = plan_keymap(params);
    CAPTURE(every, layers, variants, jobs.size());
    const int notes = (84 - 36) / every + 1 + ((84 - 36) % every != 0 ? 1 : 0);
    CHECK(jobs.size() == static_cast<std::size_t>(notes * layers * variants));
    check_tiling(jobs, params);

    std::set<std::string> names;
    for (const keymap_job& j : jobs) names.insert(j.sample);
    CHECK(names.size() == jobs.size());  // one file per job

    const std::string sfz = keymap_sfz(jobs, params, "synthetic\ntwo lines");
    std::istringstream lines(sfz);
    std::string line;
    int regions = 0;
    int groups = 0;
    while (std::getline(lines, line)) {
        CAPTURE(line);
        CHECK(sfz_line_parses(line));
        if (line.rfind("<region>", 0) == 0) ++regions;
        if (line.rfind("<group>", 0) == 0) {
            ++groups;
            if (variants > 1) CHECK(line.find("seq_length=" + std::to_string(variants)) != std::string::npos);
        }
    }
    CHECK(regions == static_cast<int>(jobs.size()));
    CHECK(groups == variants);
}

TEST_CASE("keymap sample names and layer steps", "[transform][keymap]") {
    CHECK(keymap_sample_name(60, 2, 1) == "C4_v2_rr1.wav");
    CHECK(keymap_sample_name(61, 1, 3) == "Cs4_v1_rr3.wav");
    const keymap_params params{.notes = {60, 60}, .layers = 3, .layer_step_db = 5.0, .layer_brightness_step_db_per_oct = 2.0};
    const auto jobs = plan_keymap(params);
    REQUIRE(jobs.size() == 3);
    CHECK(jobs[0].lovel == 1);
    CHECK(jobs[0].hivel == 42);
    CHECK(jobs[1].lovel == 43);
    CHECK(jobs[1].hivel == 84);
    CHECK(jobs[2].lovel == 85);
    CHECK(jobs[2].hivel == 127);
    CHECK(jobs[0].layer_gain_db == -10.0);
    CHECK(jobs[0].layer_brightness_db_per_oct == -4.0);
    CHECK(jobs[2].layer_gain_db == 0.0);
    const transform_params t = keymap_job_transform({.decay_scale = 2.0}, jobs[0]);
    CHECK(t.to_midi == 60);
    CHECK(t.decay_scale == 2.0);
    CHECK(t.gain_db == -10.0);
}

// ---------------------------------------------------------------- wane keymap output

namespace {

std::map<std::string, std::string> sfz_opcodes(const std::string& line) {
    std::map<std::string, std::string> ops;
    std::istringstream words(line);
    std::string w;
    while (words >> w) {
        const auto eq = w.find('=');
        if (eq != std::string::npos) ops[w.substr(0, eq)] = w.substr(eq + 1);
    }
    return ops;
}

}  // namespace

TEST_CASE("wane keymap: SFZ parses, samples exist, ranges tile, root notes match (libsndfile)", "[transform][keymap][cli]") {
    const char* exe = std::getenv("WANE_EXE");
#ifdef WANE_EXE
    if (exe == nullptr) exe = WANE_EXE;  // the build's wane, when run outside CTest
#endif
    REQUIRE(exe != nullptr);
    const test::scratch_dir scratch("transform_keymap");  // per process: suites may run at once
    const std::filesystem::path& dir = scratch.path;
    patch p = harmonic_patch(196.0, 10);
    p.note.length_s = 0.5;
    write_patch_file(dir / "pluck.toml", p);
    const std::string cmd = std::string("'") + exe + "' --quiet keymap '" + (dir / "pluck.toml").string() + "' -o '" +
                            (dir / "set").string() + "' --notes A2..D4 --every 4 --layers 3 --variants 2 --bits 16";
    INFO(cmd);
    REQUIRE(std::system(cmd.c_str()) == 0);

    std::ifstream sfz(dir / "set" / "pluck.sfz");
    REQUIRE(sfz.good());
    const keymap_params params{.notes = parse_note_range("A2..D4"), .every = 4, .layers = 3, .variants = 2};
    std::vector<keymap_job> regions;
    std::string line;
    int variant = 0;
    while (std::getline(sfz, line)) {
        CAPTURE(line);
        CHECK(sfz_line_parses(line));
        const auto ops = sfz_opcodes(line);
        if (line.rfind("<group>", 0) == 0) {
            REQUIRE(ops.count("seq_position") == 1);
            CHECK(ops.at("seq_length") == "2");
            variant = std::stoi(ops.at("seq_position"));
        }
        if (line.rfind("<region>", 0) != 0) continue;
        for (const char* key : {"sample", "lokey", "hikey", "pitch_keycenter", "lovel", "hivel"}) REQUIRE(ops.count(key) == 1);
        keymap_job j;
        j.sample = ops.at("sample");
        j.lokey = std::stoi(ops.at("lokey"));
        j.hikey = std::stoi(ops.at("hikey"));
        j.root_midi = std::stoi(ops.at("pitch_keycenter"));
        j.lovel = std::stoi(ops.at("lovel"));
        j.hivel = std::stoi(ops.at("hivel"));
        j.variant = variant;
        regions.push_back(j);

        const std::filesystem::path wav = dir / "set" / j.sample;
        REQUIRE(std::filesystem::exists(wav));
        SF_INFO info{};
        SNDFILE* f = sf_open(wav.string().c_str(), SFM_READ, &info);
        REQUIRE(f != nullptr);
        SF_INSTRUMENT inst{};
        const int has_inst = sf_command(f, SFC_GET_INSTRUMENT, &inst, sizeof inst);
        sf_close(f);
        CAPTURE(j.sample, has_inst, inst.basenote);
        CHECK(has_inst == SF_TRUE);
        CHECK(static_cast<int>(inst.basenote) == j.root_midi);
        CHECK(info.samplerate == 48000);
        CHECK((info.format & SF_FORMAT_SUBMASK) == SF_FORMAT_PCM_16);
    }
    CHECK(regions.size() == std::size_t{6} * 3 * 2);  // A2 C#3 F3 A3 C#4 and D4 (the top), 3 layers, 2 variants
    check_tiling(regions, params);
}

TEST_CASE("amp_veltrack: the SFZ default curve, and the fit to the rendered layers", "[transform][keymap]") {
    // SFZ specification (sfzformat.com, amp_veltrack): at 100, gain = 20 log10((v/127)^2).
    CHECK_THAT(sfz_velocity_gain_db(127, 100), WithinAbs(0.0, 1e-12));
    CHECK_THAT(sfz_velocity_gain_db(64, 100), WithinAbs(40.0 * std::log10(64.0 / 127.0), 1e-12));
    CHECK_THAT(sfz_velocity_gain_db(1, 0), WithinAbs(0.0, 1e-12));
    // One layer, or layers at one level: the sampler's tracking does all, the default 100.
    const std::vector<layer_level> one{{.lovel = 1, .hivel = 127, .level_db = 0.0}};
    CHECK(fit_amp_veltrack_pct(one) == 100);
    const std::vector<layer_level> flat{{1, 63, 0.0}, {64, 127, 0.0}};
    CHECK(fit_amp_veltrack_pct(flat) == 100);
    // Layers whose levels already carry the default curve's difference to tracking p0: the fit finds p0.
    const int p0 = GENERATE(0, 30, 60, 90);
    std::vector<layer_level> layers{{1, 42, 0.0}, {43, 84, 0.0}, {85, 127, 0.0}};
    for (layer_level& l : layers) {
        const int mid = (l.lovel + l.hivel) / 2;
        l.level_db = sfz_velocity_gain_db(mid, 100) - sfz_velocity_gain_db(mid, p0);
    }
    CAPTURE(p0, layers[0].level_db, layers[1].level_db);
    CHECK(fit_amp_veltrack_pct(layers) == p0);
}

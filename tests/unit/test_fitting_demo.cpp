// The demo notes analyzed whole (analysis/analyze) against their physical models' ground truth
// (tools/demo_models.hpp): the bar's modal frequencies and T60s, and the pluck's copy starting in
// phase with its source.
#include <catch2/catch.hpp>

#include <cmath>
#include <fstream>
#include <iterator>
#include <regex>
#include <string>
#include <utility>
#include <vector>

#include "analysis/analyze.hpp"
#include "core/envelope.hpp"
#include "io/audio_file.hpp"
#include "synthesis/render.hpp"
#include "envelope_text.hpp"
#include "test_signals.hpp"

using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;
using namespace wane;
using wane::test::describe;

namespace {

std::string demo_path(const char* name) { return std::string(WANE_SOURCE_DIR) + "/demo-data/" + name; }

analysis_result analyze_demo(const char* name) {
    const mono_audio a = read_audio(demo_path(name));
    return analyze_note(a.samples, a.sample_rate_hz, {.tracking = {}, .source_file = name, .note_name = name});
}

}  // namespace

TEST_CASE("demo bar: modal frequencies and T60s from the model's ground truth", "[fitting][analysis][demo]") {
    // demo-data/tuned-bar-a3.json: the six modes of the model (freq_hz, t60_s), read here.
    std::ifstream in(demo_path("tuned-bar-a3.json"));
    REQUIRE(in);
    const std::string json((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
    const std::regex mode_re(R"re("freq_hz":\s*([0-9.]+),\s*"t60_s":\s*([0-9.]+))re");
    std::vector<std::pair<double, double>> modes;
    for (auto it = std::sregex_iterator(json.begin(), json.end(), mode_re); it != std::sregex_iterator(); ++it)
        modes.emplace_back(std::stod((*it)[1]), std::stod((*it)[2]));
    REQUIRE(modes.size() == 6);
    const analysis_result r = analyze_demo("tuned-bar-a3.wav");
    for (const auto& [freq_hz, t60_s] : modes) {
        const partial* best = nullptr;
        for (const partial& q : r.value.partials)
            if (!best || std::abs(q.freq_hz - freq_hz) < std::abs(best->freq_hz - freq_hz)) best = &q;
        REQUIRE(best);
        CAPTURE(freq_hz, t60_s, best->freq_hz, describe(best->env));
        CHECK_THAT(best->freq_hz, WithinAbs(freq_hz, 0.1));
        REQUIRE(best->env.decay.size() == 1);  // the model's modes decay in one stage
        CHECK_THAT(best->env.decay[0].t60_s, WithinRel(t60_s, 0.03));
    }
}

TEST_CASE("demo pluck resynthesis starts in phase with the source", "[fitting][analysis][demo]") {
    // Render the patch of the demo string (synthesis/render's oscillator bank) and compare it with the
    // source over the first 100 ms after the onset: time-domain SNR = 10 log10(sum x^2 / sum (x - y)^2).
    const mono_audio a = read_audio(demo_path("steel-string-d3.wav"));
    const analysis_result r = analyze_note(a.samples, a.sample_rate_hz, {.tracking = {}, .source_file = "s", .note_name = "s"});
    const std::vector<float> y = render_patch(r.value, {.sample_rate_hz = a.sample_rate_hz, .include_noise = false});
    const auto onset = static_cast<std::size_t>(std::llround(r.value.source.onset_s * a.sample_rate_hz));
    const auto span = static_cast<std::size_t>(0.1 * a.sample_rate_hz);
    REQUIRE(onset + span <= a.samples.size());
    REQUIRE(span <= y.size());
    double sig = 0.0, err = 0.0;
    for (std::size_t i = 0; i < span; ++i) {
        const double x = a.samples[onset + i];
        sig += x * x;
        const double e = x - static_cast<double>(y[i]);
        err += e * e;
    }
    const double snr_db = 10.0 * std::log10(sig / err);
    CAPTURE(r.value.source.onset_s, r.summary.partials, snr_db);
    CHECK(snr_db >= 15.0);  // project requirement: render within 15 dB SNR of the source
}

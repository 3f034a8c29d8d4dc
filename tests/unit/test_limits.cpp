// Render budget (synthesis/render_budget.hpp): partials x frames against max_render_partial_samples, and the
// output buffer against max_render_buffer_bytes. The expected figures are exact arithmetic on the
// chosen sizes (ground truth: frames = round(length_s * rate_hz), 4 bytes per float frame).
#include <catch2/catch.hpp>

#include <cmath>
#include <optional>
#include <stdexcept>
#include <string>

#include "core/patch.hpp"
#include "synthesis/render_budget.hpp"

using Catch::Matchers::Contains;
using namespace wane;

namespace {

/// n partials at freq_hz (all the same: the budget counts partials, not their content).
patch patch_of(std::size_t n, double freq_hz = 440.0, double length_s = 4.0) {
    patch p;
    p.note.name = "budget";
    p.note.length_s = length_s;
    for (std::size_t k = 0; k < n; ++k) {
        partial part;
        part.freq_hz = freq_hz;
        part.env = {.attack_s = 0.001, .peak = level_db{-40.0}, .decay = {{.t60_s = 2.0, .until_s = std::nullopt}}};
        p.partials.push_back(part);
    }
    return p;
}

std::string refusal(const patch& p, double rate_hz, double length_s, const std::filesystem::path& path = {}) {
    try {
        check_render_budget(p, rate_hz, length_s, path);
    } catch (const std::runtime_error& e) {
        return e.what();
    }
    return {};
}

}  // namespace

TEST_CASE("4096 partials x 600 s x 192 kHz is refused with the numbers and the buffer size", "[limits]") {
    const patch p = patch_of(max_partials);
    const render_cost c = render_cost_of(p, 192000.0, 600.0);
    CHECK(c.partials == 4096);
    CHECK(c.frames == 115200000);                         // 600 * 192000
    CHECK(c.partial_samples == 4096.0 * 115200000.0);     // 4.718592e11
    CHECK(c.buffer_bytes == std::uintmax_t{460800000});   // 4 bytes per frame: 439 MiB
    const std::string msg = refusal(p, 192000.0, 600.0, "big.toml");
    INFO(msg);
    CHECK_THAT(msg, Contains("big.toml: render refused"));
    CHECK_THAT(msg, Contains("(4096 partials + 0 noise bands x 4) x 600 s x 192000 Hz = 4.72e+11 partial-samples"));
    CHECK_THAT(msg, Contains("over the budget of 1e+11"));
    CHECK_THAT(msg, Contains("output buffer would take 439 MiB"));
}

TEST_CASE("4096 partials x 60 s x 48 kHz is within the budget", "[limits]") {
    const patch p = patch_of(max_partials);
    const render_cost c = render_cost_of(p, 48000.0, 60.0);
    CHECK(c.partial_samples == 4096.0 * 2880000.0);  // 1.179648e10
    CHECK(c.partial_samples < max_render_partial_samples);
    CHECK_NOTHROW(check_render_budget(p, 48000.0, 60.0));
}

TEST_CASE("the budget edge: one frame more crosses it", "[limits]") {
    // 1e11 / 4096 = 24414062.5 frames: 24414062 is inside, 24414063 outside. At 1 kHz a frame is 1 ms.
    const patch p = patch_of(max_partials);
    const double rate_hz = 1000.0;
    CHECK(render_cost_of(p, rate_hz, 24414.062).frames == 24414062);
    CHECK_NOTHROW(check_render_budget(p, rate_hz, 24414.062));
    CHECK(render_cost_of(p, rate_hz, 24414.063).frames == 24414063);
    CHECK_THAT(refusal(p, rate_hz, 24414.063), Contains("over the budget"));
}

TEST_CASE("only rendered partials count, length 0 means the patch's own length", "[limits]") {
    // 4096 partials at 30 kHz are above the 24 kHz Nyquist of a 48 kHz render: none is computed.
    const patch high = patch_of(max_partials, 30000.0);
    CHECK(render_cost_of(high, 48000.0, 600.0).partials == 0);
    CHECK_NOTHROW(check_render_budget(high, 48000.0, 600.0));
    // ...but at 192 kHz they are all rendered, and 600 s of them is refused.
    CHECK(render_cost_of(high, 192000.0, 600.0).partials == 4096);
    CHECK_THAT(refusal(high, 192000.0, 600.0), Contains("4096 partials"));
    // length_s = 0: the patch's note.length_s (here 500 s: 4096 x 9.6e7 = 3.9e11) decides.
    const patch long_note = patch_of(max_partials, 440.0, 500.0);
    CHECK(render_cost_of(long_note, 192000.0, 0.0).frames == 96000000);
    CHECK_THAT(refusal(long_note, 192000.0, 0.0), Contains("x 500 s x 192000 Hz"));
    CHECK_NOTHROW(check_render_budget(long_note, 192000.0, 10.0));
}

TEST_CASE("an output buffer over 1 GiB is refused naming its size", "[limits]") {
    // One partial (no work to speak of), 600 s at 1 MHz: 6e8 frames, 2.4e9 bytes = 2289 MiB.
    const patch p = patch_of(1);
    const render_cost c = render_cost_of(p, 1e6, 600.0);
    CHECK(c.buffer_bytes == std::uintmax_t{2400000000});
    CHECK(c.partial_samples < max_render_partial_samples);
    const std::string msg = refusal(p, 1e6, 600.0);
    INFO(msg);
    CHECK_THAT(msg, Contains("600 s x 1000000 Hz = 600000000 frames"));
    CHECK_THAT(msg, Contains("2289 MiB, over the 1024 MiB limit"));
    // The largest render the format allows (600 s at 192 kHz) stays under it.
    CHECK_NOTHROW(check_render_budget(p, 192000.0, 600.0));
}

TEST_CASE("bad arguments are a programming error", "[limits]") {
    const patch p = patch_of(1);
    CHECK_THROWS_AS(check_render_budget(p, 0.0, 1.0), std::invalid_argument);
    CHECK_THROWS_AS(check_render_budget(p, 48000.0, std::nan("")), std::invalid_argument);
}

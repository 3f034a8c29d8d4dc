// The noise renderer's sample loops (synthesis/noise_kernels.hpp): written onto_zero they give the
// bits their sum gives on a zeroed buffer, the reference being that sum itself (a frame zeroed and
// added to, as the renderer made every frame before). Signed zeros are among the inputs: 0 + (-0)
// is +0, which a plain store of the product would not give.
#include <catch2/catch.hpp>

#include <algorithm>
#include <bit>
#include <cstdint>
#include <string>
#include <vector>

#include "core/rng.hpp"
#include "synthesis/noise_kernels.hpp"

using namespace wane;

namespace {

/// count floats in [-1, 1), every seventh a -0 and every eleventh a +0 (seeded).
std::vector<float> samples(std::uint64_t seed, std::size_t count) {
    splitmix64 rng{seed};
    std::vector<float> v(count);
    for (std::size_t n = 0; n < count; ++n) {
        v[n] = static_cast<float>(rng.uniform_pm1());
        if (n % 7 == 3) v[n] = -0.0f;
        if (n % 11 == 5) v[n] = 0.0f;
    }
    return v;
}

/// Index of the first float whose bits differ, or a.size() when all are equal.
std::size_t first_bit_difference(const std::vector<float>& a, const std::vector<float>& b) {
    for (std::size_t i = 0; i < a.size(); ++i)
        if (std::bit_cast<std::uint32_t>(a[i]) != std::bit_cast<std::uint32_t>(b[i])) return i;
    return a.size();
}

}  // namespace

TEST_CASE("noise kernels written onto zero give the bits of their sum on a zeroed frame", "[noise]") {
    const std::size_t count = GENERATE(std::size_t{1}, std::size_t{7}, std::size_t{1024}, std::size_t{2053});
    const float gain = GENERATE(0.75f, -1.5e-3f);
    const std::vector<float> src = samples(11, count);
    const std::vector<float> amp = samples(12, count);
    CAPTURE(count, gain);

    std::vector<float> summed(count, 0.0f);
    std::vector<float> written = samples(13, count);  // whatever was there: overwritten
    noise_kernels::add_scaled(summed.data(), src.data(), gain, count, false);
    noise_kernels::add_scaled(written.data(), src.data(), gain, count, true);
    std::size_t at = first_bit_difference(summed, written);
    INFO("scaled: first difference at " << at << (at < count ? " (" + std::to_string(summed[at]) + " vs " + std::to_string(written[at]) + ")" : std::string{}));
    CHECK(at == count);

    std::fill(summed.begin(), summed.end(), 0.0f);
    written = samples(14, count);
    noise_kernels::add_modulated(summed.data(), src.data(), amp.data(), gain, count, false);
    noise_kernels::add_modulated(written.data(), src.data(), amp.data(), gain, count, true);
    at = first_bit_difference(summed, written);
    INFO("modulated: first difference at " << at);
    CHECK(at == count);
}

TEST_CASE("noise kernels added to a frame add each product once", "[noise]") {
    // Reference: the scalar sum acc + gain * src in float, written out here.
    const std::size_t count = 1000;
    const std::vector<float> src = samples(21, count);
    const std::vector<float> amp = samples(22, count);
    const std::vector<float> acc0 = samples(23, count);
    const float gain = 0.3f;
    std::vector<float> scaled = acc0, modulated = acc0, expect_scaled(count), expect_modulated(count);
    for (std::size_t n = 0; n < count; ++n) {
        expect_scaled[n] = acc0[n] + gain * src[n];
        expect_modulated[n] = acc0[n] + gain * (amp[n] * src[n]);
    }
    noise_kernels::add_scaled(scaled.data(), src.data(), gain, count, false);
    noise_kernels::add_modulated(modulated.data(), src.data(), amp.data(), gain, count, false);
    CHECK(first_bit_difference(scaled, expect_scaled) == count);
    CHECK(first_bit_difference(modulated, expect_modulated) == count);
}

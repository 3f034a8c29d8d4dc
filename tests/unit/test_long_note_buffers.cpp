// The buffers a long note's analysis no longer copies: the projections read the samples as floats
// (no double copy), and a note's spectrum reads the note as zero padded (no padded copy). Each is
// checked against the copy it replaces (the same bits) and against an independent sum.
#include <catch2/catch.hpp>

#include <cmath>
#include <complex>
#include <cstddef>
#include <cstdint>
#include <vector>

#include "core/rng.hpp"
#include "core/units.hpp"
#include "modes/mode_projection.hpp"
#include "modes/narrowband.hpp"

using namespace wane;

namespace {

/// Uniform noise in [-0.5, 0.5) plus a decaying 440 Hz tone at 48 kHz, from the project's generator.
std::vector<float> test_note(std::size_t frames, std::uint64_t seed) {
    std::vector<float> x(frames);
    for (std::size_t n = 0; n < frames; ++n) {
        const double t = static_cast<double>(n) / 48000.0;
        x[n] = static_cast<float>(0.5 * hashed_signed(seed, 0, n) + std::exp(-3.0 * t) * std::cos(two_pi * 440.0 * t));
    }
    return x;
}

}  // namespace

TEST_CASE("projections read from floats equal those of a double copy bit for bit, and a direct long double sum", "[modes]") {
    const std::vector<float> x = test_note(5000, 7);
    const std::vector<double> rho = {-1e-4, -3e-4, -2e-5, -5e-4, -1e-3};
    const std::vector<double> omega = {0.05, 0.0576, 1.3, 2.9, 0.2};
    const std::size_t count = 4321;
    std::vector<std::complex<double>> from_floats(rho.size());
    project_modes(x, count, rho, omega, from_floats);
    const std::vector<double> copy(x.begin(), x.begin() + static_cast<std::ptrdiff_t>(count));
    std::vector<std::complex<double>> from_copy(rho.size());
    const std::vector<std::size_t> first = {0, 1, 2, 3}, rest = {4};
    project_group(copy, first, rho, omega, from_copy);
    project_group(copy, rest, rho, omega, from_copy);
    for (std::size_t k = 0; k < rho.size(); ++k) {
        INFO("mode " << k << ": floats " << from_floats[k] << ", double copy " << from_copy[k]);
        CHECK(from_floats[k] == from_copy[k]);
        std::complex<long double> direct{};
        for (std::size_t n = 0; n < count; ++n)
            direct += static_cast<long double>(x[n]) *
                      std::exp(std::complex<long double>(rho[k] * static_cast<long double>(n), omega[k] * static_cast<long double>(n)));
        INFO("direct " << static_cast<double>(direct.real()) << " + " << static_cast<double>(direct.imag()) << " i");
        // Tolerance: the phasor recursion's rounding over 512-sample stretches, far under the sum's size (~30).
        CHECK(std::abs(from_floats[k] - std::complex<double>(direct)) < 1e-8);
    }
}

TEST_CASE("a note's spectrum read as zero padded equals the spectrum of a padded copy bit for bit", "[modes]") {
    const std::vector<float> x = test_note(9000, 3);
    const std::size_t padded_frames = 12345;
    std::vector<float> padded(x);
    padded.resize(padded_frames, 0.0f);
    const note_spectrum read_padded(x, 48000.0, padded_frames), copied(padded, 48000.0);
    CHECK(read_padded.duration_s() == copied.duration_s());
    CHECK(read_padded.energy_between(20.0, 23000.0) == copied.energy_between(20.0, 23000.0));
    for (const double centre_hz : {440.0, 1000.0, 7000.0}) {
        const narrowband a = read_padded.band(centre_hz, 40.0, 200.0), b = copied.band(centre_hz, 40.0, 200.0);
        INFO("centre " << centre_hz << " Hz: " << a.y.size() << " and " << b.y.size() << " samples");
        REQUIRE(a.y.size() == b.y.size());
        CHECK(a.centre_hz == b.centre_hz);
        CHECK(a.y == b.y);
    }
    // Parseval against the samples (an independent sum): energy_between leaves out the 0 Hz bin and
    // counts the Nyquist bin twice, each about 1 / 12348 of the energy of this noise, so 1e-3 relative.
    double energy = 0.0;
    for (const float v : x) energy += double(v) * double(v);
    INFO("samples " << energy << ", spectrum " << read_padded.energy_between(0.0, 24000.0));
    CHECK(std::abs(read_padded.energy_between(0.0, 24000.0) - energy) < 1e-3 * energy);
}

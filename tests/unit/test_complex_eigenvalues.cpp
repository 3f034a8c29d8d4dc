// The eigenvalues of a general complex matrix (modes/complex_eigenvalues: Hessenberg reduction and
// shifted QR steps, the poles of ESPRIT's rotation) against Eigen's ComplexEigenSolver and against
// the known poles of a similarity transform.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <complex>
#include <cstdint>
#include <vector>

#include <Eigen/Dense>

#include "core/rng.hpp"
#include "core/units.hpp"
#include "modes/complex_eigenvalues.hpp"

using namespace wane;

namespace {

/// An n x n complex matrix with entries uniform in [-1, 1) + i [-1, 1), drawn from the project's
/// generator (stream 0 real parts, 1 imaginary), column-major.
Eigen::MatrixXcd seeded_matrix(Eigen::Index n, std::uint64_t seed) {
    Eigen::MatrixXcd a(n, n);
    for (Eigen::Index k = 0; k < n * n; ++k)
        a(k) = {hashed_signed(seed, 0, static_cast<std::uint64_t>(k)), hashed_signed(seed, 1, static_cast<std::uint64_t>(k))};
    return a;
}

}  // namespace

TEST_CASE("complex_eigenvalues equal Eigen's ComplexEigenSolver on random and ESPRIT-like matrices", "[modes]") {
    const auto n = static_cast<Eigen::Index>(GENERATE(1, 2, 3, 5, 8, 13, 24, 31));
    const std::uint64_t seed = GENERATE(1u, 2u, 3u);
    const bool espritlike = GENERATE(false, true);
    // ESPRIT-like: S diag(z) S^-1 with poles z just inside the unit circle (a rotation matrix
    // Phi of well-separated damped modes), S random; else a plain random matrix.
    Eigen::MatrixXcd a = seeded_matrix(n, seed);
    if (espritlike) {
        Eigen::VectorXcd z(n);
        for (Eigen::Index k = 0; k < n; ++k)
            z(k) = std::polar(0.9 + 0.099 * (0.5 + 0.5 * hashed_signed(seed, 2, static_cast<std::uint64_t>(k))),
                              pi * hashed_signed(seed, 3, static_cast<std::uint64_t>(k)));
        const Eigen::MatrixXcd s = a + 4.0 * Eigen::MatrixXcd::Identity(n, n);
        a = s * z.asDiagonal() * s.inverse();
    }
    const std::vector<std::complex<double>> got = complex_eigenvalues(std::span(a.data(), static_cast<std::size_t>(a.size())), static_cast<std::size_t>(n));
    const Eigen::ComplexEigenSolver<Eigen::MatrixXcd> ref(a, false);
    REQUIRE(ref.info() == Eigen::Success);
    REQUIRE(got.size() == static_cast<std::size_t>(n));
    // Eigen orders its eigenvalues by ascending magnitude; so does complex_eigenvalues. The same
    // QR steps give the same values up to rounding: within 1e-12 of the matrix's norm.
    const double norm = a.norm();
    for (Eigen::Index k = 0; k < n; ++k) {
        const std::complex<double> want = ref.eigenvalues()(k), have = got[static_cast<std::size_t>(k)];
        CAPTURE(n, seed, espritlike, k, have, want);
        CHECK(std::abs(have - want) <= 1e-12 * norm);
        if (k > 0) CHECK(std::abs(got[static_cast<std::size_t>(k - 1)]) <= std::abs(have));
    }
}

TEST_CASE("complex_eigenvalues recover the known poles of a similarity transform", "[modes]") {
    // Exact ground truth: A = S diag(z) S^-1 has the eigenvalues z (S well conditioned).
    const Eigen::Index n = 24;
    Eigen::VectorXcd z(n);
    for (Eigen::Index k = 0; k < n; ++k) z(k) = std::polar(0.5 + 0.02 * static_cast<double>(k), 0.25 * static_cast<double>(k));
    const Eigen::MatrixXcd s = seeded_matrix(n, 7) + 5.0 * Eigen::MatrixXcd::Identity(n, n);
    const Eigen::MatrixXcd a = s * z.asDiagonal() * s.inverse();
    const std::vector<std::complex<double>> got = complex_eigenvalues(std::span(a.data(), static_cast<std::size_t>(a.size())), static_cast<std::size_t>(n));
    REQUIRE(got.size() == static_cast<std::size_t>(n));
    // Magnitudes 0.5 + 0.02 k ascend with k, so got[k] is z_k.
    for (Eigen::Index k = 0; k < n; ++k) {
        CAPTURE(k, got[static_cast<std::size_t>(k)], z(k));
        CHECK(std::abs(got[static_cast<std::size_t>(k)] - z(k)) < 1e-10);
    }
    const std::complex<double> bad[] = {{1.0, 0.0}, {std::nan(""), 0.0}, {0.0, 0.0}, {1.0, 0.0}};
    CHECK(complex_eigenvalues(bad, 2).empty());
}

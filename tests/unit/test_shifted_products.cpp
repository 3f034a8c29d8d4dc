// ESPRIT's shifted-subspace products (modes/shifted_products: W = U1^H U2 from the rows of one
// basis) against the Eigen product they replace, bit for bit: the poles, and so the patches,
// stay the same numbers.
#include <catch2/catch.hpp>

#include <bit>
#include <complex>
#include <cstdint>

#include <Eigen/Core>

#include "core/rng.hpp"
#include "modes/shifted_products.hpp"

using namespace wane;

namespace {

/// A dim x r basis with entries uniform in [-1, 1) + i [-1, 1) from the project's generator
/// (stream 0 real parts, 1 imaginary); `zeros` clears its first column (exact zero sums).
Eigen::MatrixXcd seeded_basis(Eigen::Index dim, Eigen::Index r, std::uint64_t seed, bool zeros) {
    Eigen::MatrixXcd u(dim, r);
    for (Eigen::Index k = 0; k < u.size(); ++k)
        u(k) = {hashed_signed(seed, 0, static_cast<std::uint64_t>(k)), hashed_signed(seed, 1, static_cast<std::uint64_t>(k))};
    if (zeros) u.col(0).setZero();
    return u;
}

}  // namespace

TEST_CASE("shifted_inner_products equal Eigen's U1^H U2 bit for bit over basis sizes", "[modes]") {
    // dim 40 is the subband ESPRIT's (orders up to 24); the sweep crosses Eigen's paths: a
    // vector (r = 1), the coefficient-wise product (dim - 1 + 2 r < 20), the unblocked matrix
    // product (depth below 48, columns in groups of four and the rest), blocking (depth >= 48).
    const auto dim = static_cast<Eigen::Index>(GENERATE(3, 6, 9, 10, 17, 24, 33, 40, 41, 48, 49, 60));
    const auto r = static_cast<Eigen::Index>(GENERATE(1, 2, 3, 4, 5, 7, 8, 13, 16, 23, 24));
    const std::uint64_t seed = GENERATE(1u, 2u);
    const bool zeros = GENERATE(false, true);
    if (r >= dim) return;
    const Eigen::MatrixXcd u = seeded_basis(dim, r, seed, zeros);
    const Eigen::MatrixXcd want = u.topRows(dim - 1).adjoint() * u.bottomRows(dim - 1);
    const Eigen::MatrixXcd got = shifted_inner_products(u);
    REQUIRE(got.rows() == r);
    REQUIRE(got.cols() == r);
    for (Eigen::Index j = 0; j < r; ++j)
        for (Eigen::Index i = 0; i < r; ++i) {
            const std::complex<double> have = got(i, j), expect = want(i, j);
            CAPTURE(dim, r, seed, zeros, i, j, have, expect, have - expect);
            CHECK(std::bit_cast<std::uint64_t>(have.real()) == std::bit_cast<std::uint64_t>(expect.real()));
            CHECK(std::bit_cast<std::uint64_t>(have.imag()) == std::bit_cast<std::uint64_t>(expect.imag()));
        }
}

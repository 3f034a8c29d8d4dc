// The Householder reduction to Hessenberg form (modes/hessenberg_reduction, the first step of
// complex_eigenvalues) against Eigen's HessenbergDecomposition, bit for bit: ESPRIT's poles, and
// so the patches, stay the same numbers.
#include <catch2/catch.hpp>

#include <bit>
#include <complex>
#include <cstdint>
#include <vector>

#include <Eigen/Dense>

#include "core/rng.hpp"
#include "modes/hessenberg_reduction.hpp"

using namespace wane;

TEST_CASE("reduce_to_hessenberg equals Eigen's HessenbergDecomposition bit for bit over sizes and structures",
          "[modes]") {
    // 24 is the subband ESPRIT's largest rotation; a zero column below the diagonal takes the
    // reflector's identity branch (tau 0), a real matrix gives exact zeros in the sums.
    const auto n = static_cast<Eigen::Index>(GENERATE(1, 2, 3, 4, 5, 8, 13, 23, 24, 31));
    const std::uint64_t seed = GENERATE(1u, 2u, 3u);
    const int structure = GENERATE(0, 1, 2);  // 0 random, 1 first column zero below the diagonal, 2 real
    Eigen::MatrixXcd a(n, n);
    for (Eigen::Index k = 0; k < a.size(); ++k)
        a(k) = {hashed_signed(seed, 0, static_cast<std::uint64_t>(k)),
                structure == 2 ? 0.0 : hashed_signed(seed, 1, static_cast<std::uint64_t>(k))};
    if (structure == 1 && n > 2) a.col(0).tail(n - 1).setZero();
    const Eigen::MatrixXcd want = n > 1 ? Eigen::MatrixXcd(Eigen::HessenbergDecomposition<Eigen::MatrixXcd>(a).matrixH()) : a;
    const auto size = static_cast<std::size_t>(n * n);
    std::vector<double> re(size), im(size);
    for (std::size_t k = 0; k < size; ++k) re[k] = a(static_cast<Eigen::Index>(k)).real(), im[k] = a(static_cast<Eigen::Index>(k)).imag();
    reduce_to_hessenberg(re, im, static_cast<std::size_t>(n));
    for (Eigen::Index c = 0; c < n; ++c)
        for (Eigen::Index r = 0; r < n; ++r) {
            const std::complex<double> have{re[static_cast<std::size_t>(c * n + r)], im[static_cast<std::size_t>(c * n + r)]};
            const std::complex<double> expect = want(r, c);
            CAPTURE(n, seed, structure, r, c, have, expect, have - expect);
            CHECK(std::bit_cast<std::uint64_t>(have.real()) == std::bit_cast<std::uint64_t>(expect.real()));
            CHECK(std::bit_cast<std::uint64_t>(have.imag()) == std::bit_cast<std::uint64_t>(expect.imag()));
        }
}

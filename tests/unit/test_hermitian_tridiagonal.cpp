// The Householder tridiagonalization of a Hermitian matrix (modes/hermitian_tridiagonal.hpp)
// against its definition: Q (applied to the identity) is unitary and Q T Q^H gives the matrix back,
// and T's eigenvalues are the matrix's (Eigen's SelfAdjointEigenSolver on the dense matrix).
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <complex>
#include <cstdint>
#include <vector>

#include <Eigen/Dense>

#include "core/rng.hpp"
#include "modes/hermitian_tridiagonal.hpp"

using namespace wane;

TEST_CASE("tridiagonalize gives R = Q T Q^H with Q unitary and T holding R's eigenvalues", "[modes]") {
    const auto n = static_cast<std::size_t>(GENERATE(2, 3, 7, 40));
    const std::uint64_t seed = GENERATE(1u, 2u);
    // A Hermitian matrix with entries uniform in [-1, 1) + i [-1, 1) (a real diagonal), plus a
    // covariance-like one (B B^H) whose eigenvalues spread over decades.
    const bool covariance = GENERATE(false, true);
    const auto dim = static_cast<Eigen::Index>(n);
    Eigen::MatrixXcd b(dim, dim);
    for (Eigen::Index k = 0; k < b.size(); ++k)
        b(k) = {hashed_signed(seed, 0, static_cast<std::uint64_t>(k)), hashed_signed(seed, 1, static_cast<std::uint64_t>(k))};
    Eigen::MatrixXcd r = covariance ? Eigen::MatrixXcd(b * b.adjoint()) : Eigen::MatrixXcd(0.5 * (b + b.adjoint()));
    std::vector<double> re(n * n), im(n * n);
    for (std::size_t k = 0; k < n * n; ++k) re[k] = r(static_cast<Eigen::Index>(k)).real(), im[k] = r(static_cast<Eigen::Index>(k)).imag();
    const hermitian_tridiagonal t = tridiagonalize(re, im, n);
    std::vector<double> q_re, q_im;
    apply_q(t, Eigen::MatrixXd::Identity(dim, dim), q_re, q_im);
    Eigen::MatrixXcd q(dim, dim), tri = Eigen::MatrixXcd::Zero(dim, dim);
    for (Eigen::Index i = 0; i < dim; ++i)
        for (Eigen::Index j = 0; j < dim; ++j) q(i, j) = {q_re[static_cast<std::size_t>(i * dim + j)], q_im[static_cast<std::size_t>(i * dim + j)]};
    for (Eigen::Index i = 0; i < dim; ++i) tri(i, i) = t.diag(i);
    for (Eigen::Index i = 0; i + 1 < dim; ++i) tri(i + 1, i) = tri(i, i + 1) = t.sub(i);
    const double scale = r.norm();
    const double unitary_error = (q.adjoint() * q - Eigen::MatrixXcd::Identity(dim, dim)).norm();
    const double rebuild_error = (q * tri * q.adjoint() - r).norm() / scale;
    const Eigen::SelfAdjointEigenSolver<Eigen::MatrixXcd> dense(r, Eigen::EigenvaluesOnly);
    const Eigen::SelfAdjointEigenSolver<Eigen::MatrixXcd> of_t(tri, Eigen::EigenvaluesOnly);
    const double value_error = (dense.eigenvalues() - of_t.eigenvalues()).cwiseAbs().maxCoeff() / scale;
    CAPTURE(n, seed, covariance, unitary_error, rebuild_error, value_error);
    // Tolerances: Householder steps are backward stable, errors of a few n eps of the norm.
    CHECK(unitary_error < 1e-13);
    CHECK(rebuild_error < 1e-13);
    CHECK(value_error < 1e-13);
}

namespace {

/// A symmetric tridiagonal matrix of size n (diagonal uniform in [-1, 1), off-diagonal 1e-3 times
/// that, every fifth 1e-9 smaller still: nearly split blocks, where QR deflates) and Eigen's
/// eigen-decomposition of it, the reference for tridiagonal_eigen and tridiagonal_values.
struct tridiagonal_case {
    Eigen::VectorXd diag, sub;
    Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> ref;
};
tridiagonal_case make_tridiagonal_case(Eigen::Index n, std::uint64_t seed) {
    tridiagonal_case c{.diag = Eigen::VectorXd(n), .sub = Eigen::VectorXd(n - 1), .ref = {}};
    for (Eigen::Index i = 0; i < n; ++i) c.diag(i) = hashed_signed(seed, 0, static_cast<std::uint64_t>(i));
    for (Eigen::Index i = 0; i + 1 < n; ++i)
        c.sub(i) = 1e-3 * hashed_signed(seed, 1, static_cast<std::uint64_t>(i)) * (i % 5 == 0 ? 1e-9 : 1.0);
    c.ref.computeFromTridiagonal(c.diag, c.sub, Eigen::ComputeEigenvectors);
    return c;
}

}  // namespace

TEST_CASE("tridiagonal_eigen gives Eigen's computeFromTridiagonal values and vectors, bit for bit", "[modes]") {
    // Its promise: Eigen's steps, with the rotations applied by a loop of its own that does the
    // same products and sums per entry.
    const auto n = static_cast<Eigen::Index>(GENERATE(2, 5, 24, 40));
    const std::uint64_t seed = GENERATE(1u, 2u, 3u);
    const tridiagonal_case tc = make_tridiagonal_case(n, seed);
    Eigen::VectorXd values;
    Eigen::MatrixXd vectors;
    REQUIRE(tridiagonal_eigen(tc.diag, tc.sub, values, vectors));
    REQUIRE(tc.ref.info() == Eigen::Success);
    const double value_diff = (values - tc.ref.eigenvalues()).cwiseAbs().maxCoeff();
    const double vector_diff = (vectors - tc.ref.eigenvectors()).cwiseAbs().maxCoeff();
    CAPTURE(n, seed, value_diff, vector_diff);
    CHECK(value_diff == 0.0);
    CHECK(vector_diff == 0.0);
}

TEST_CASE("tridiagonal_values and tridiagonal_vectors give Eigen's values bit for bit and its leading vectors to rounding", "[modes]") {
    // The same QR steps as computeFromTridiagonal, the rotations applied afterwards from the last
    // to the first to the wanted columns only: the same product of rotations, another rounding
    // (tolerance: a few hundred rotations of unit vectors, each exact to eps).
    const auto n = static_cast<Eigen::Index>(GENERATE(2, 5, 24, 40));
    const std::uint64_t seed = GENERATE(1u, 2u, 3u);
    const tridiagonal_case tc = make_tridiagonal_case(n, seed);
    Eigen::VectorXd values;
    tridiagonal_rotations rotations;
    REQUIRE(tridiagonal_values(tc.diag, tc.sub, values, rotations));
    REQUIRE(tc.ref.info() == Eigen::Success);
    CHECK((values - tc.ref.eigenvalues()).cwiseAbs().maxCoeff() == 0.0);
    const auto first = static_cast<std::size_t>(GENERATE(0, 1)) * static_cast<std::size_t>(n / 2);
    std::vector<double> got;
    std::size_t stride = 0;
    tridiagonal_vectors(rotations, first, got, stride);
    REQUIRE(stride % 4 == 0);
    REQUIRE(got.size() == static_cast<std::size_t>(n) * stride);
    double vector_diff = 0.0, padding = 0.0;
    for (std::size_t r = 0; r < static_cast<std::size_t>(n); ++r)
        for (std::size_t c = 0; c < stride; ++c) {
            const double have = got[r * stride + c];
            if (first + c < static_cast<std::size_t>(n)) {
                const double want = tc.ref.eigenvectors()(static_cast<Eigen::Index>(r), static_cast<Eigen::Index>(first + c));
                vector_diff = std::max(vector_diff, std::abs(have - want));
            } else {
                padding = std::max(padding, std::abs(have));
            }
        }
    CAPTURE(n, seed, first, vector_diff);
    CHECK(vector_diff < 1e-13);
    CHECK(padding == 0.0);
}

// The blocked Cholesky factor of modes/cholesky.hpp against Eigen's LLT (an independent
// implementation: its own blocking and product kernels) on seeded symmetric positive definite
// matrices of sizes around the block and tile edges, and a Gram matrix of the kind the modes'
// fits factor (nearly singular columns, a small ridge).
#include <catch2/catch.hpp>

#include <cmath>
#include <cstddef>
#include <cstdint>

#include <Eigen/Cholesky>
#include <Eigen/Core>

#include "core/rng.hpp"
#include "modes/cholesky.hpp"
#include "test_signals.hpp"

using namespace wane;

namespace {

/// B B^T + size I for a rows x (rows + 3) matrix B of seeded Gaussian entries: positive definite,
/// condition near 4.
Eigen::MatrixXd spd_matrix(Eigen::Index size, std::uint64_t seed) {
    splitmix64 rng{seed};
    const test::gaussian_draw<double> draw{0.0, 1.0};
    Eigen::MatrixXd b(size, size + 3);
    for (Eigen::Index k = 0; k < b.size(); ++k) b(k) = draw(rng);
    Eigen::MatrixXd a = b * b.transpose();
    a.diagonal().array() += static_cast<double>(size);
    return a;
}

/// Largest |entry| of the lower triangle of x - y over that of y.
double lower_rel_diff(const Eigen::MatrixXd& x, const Eigen::MatrixXd& y) {
    const Eigen::MatrixXd d = x.triangularView<Eigen::Lower>().toDenseMatrix() - y.triangularView<Eigen::Lower>().toDenseMatrix();
    return d.cwiseAbs().maxCoeff() / y.triangularView<Eigen::Lower>().toDenseMatrix().cwiseAbs().maxCoeff();
}

}  // namespace

TEST_CASE("the blocked Cholesky factor equals Eigen's LLT to rounding and leaves the upper triangle alone", "[cholesky]") {
    const Eigen::Index size = GENERATE(1, 2, 7, 8, 9, 31, 32, 33, 63, 64, 65, 100, 257);
    const Eigen::MatrixXd a = spd_matrix(size, 1234U + static_cast<std::uint64_t>(size));
    Eigen::MatrixXd got = a;
    REQUIRE(cholesky_in_place(got));
    const Eigen::LLT<Eigen::MatrixXd> want(a);
    REQUIRE(want.info() == Eigen::Success);
    const Eigen::MatrixXd want_l = want.matrixL();
    const double rel = lower_rel_diff(got, want_l);
    CAPTURE(size, rel);
    // Condition near 4: the two factors' rounding differs by a few ulps of the entries.
    CHECK(rel < 1e-13);
    const Eigen::MatrixXd l = got.triangularView<Eigen::Lower>();
    const double rebuilt = (l * l.transpose() - a).cwiseAbs().maxCoeff() / a.cwiseAbs().maxCoeff();
    CAPTURE(rebuilt);
    CHECK(rebuilt < 1e-14);
    const Eigen::MatrixXd upper_got = got.triangularView<Eigen::StrictlyUpper>();
    const Eigen::MatrixXd upper_a = a.triangularView<Eigen::StrictlyUpper>();
    CHECK(upper_got == upper_a);
}

TEST_CASE("the blocked Cholesky factor of a ridged Gram matrix of nearly equal columns solves like Eigen's LLT", "[cholesky]") {
    // Columns cos(w_k n) with w_k 1e-4 rad apart over 200 samples: nearly dependent, as close
    // modes are; the ridge (1e-9 of the mean diagonal, as fit_mode_amplitudes adds) keeps it definite.
    const Eigen::Index cols = GENERATE(40, 90);
    constexpr Eigen::Index rows = 200;
    Eigen::MatrixXd basis(rows, cols);
    for (Eigen::Index k = 0; k < cols; ++k)
        for (Eigen::Index n = 0; n < rows; ++n) basis(n, k) = std::cos((0.3 + 1e-4 * static_cast<double>(k)) * static_cast<double>(n));
    Eigen::MatrixXd gram = basis.transpose() * basis;
    gram.diagonal().array() += 1e-9 * gram.diagonal().mean();
    splitmix64 rng{77};
    const test::gaussian_draw<double> draw{0.0, 1.0};
    Eigen::VectorXd rhs(cols);
    for (Eigen::Index k = 0; k < cols; ++k) rhs(k) = draw(rng);
    Eigen::MatrixXd factor = gram;
    REQUIRE(cholesky_in_place(factor));
    Eigen::VectorXd got = rhs;
    factor.triangularView<Eigen::Lower>().solveInPlace(got);
    factor.transpose().triangularView<Eigen::Upper>().solveInPlace(got);
    const Eigen::VectorXd want = gram.llt().solve(rhs);
    // Residuals of the two solutions, relative to |rhs|: both at the rounding of a system of this
    // condition, so the new one may be no worse than 10 times Eigen's (or 1e-6 of |rhs|).
    const double res_got = (gram * got - rhs).norm() / rhs.norm();
    const double res_want = (gram * want - rhs).norm() / rhs.norm();
    CAPTURE(cols, res_got, res_want);
    CHECK(res_got <= std::max(10.0 * res_want, 1e-6));
}

TEST_CASE("the blocked Cholesky factor refuses a matrix that is not positive definite", "[cholesky]") {
    const Eigen::Index size = GENERATE(5, 70);
    Eigen::MatrixXd a = spd_matrix(size, 99);
    // A negative eigenvalue: subtract twice the largest diagonal entry along one direction.
    const Eigen::VectorXd u = Eigen::VectorXd::Ones(size) / std::sqrt(static_cast<double>(size));
    a -= 2.0 * a.diagonal().maxCoeff() * static_cast<double>(size) * u * u.transpose();
    const Eigen::LLT<Eigen::MatrixXd> eigen_says(a);
    CAPTURE(size);
    REQUIRE(eigen_says.info() == Eigen::NumericalIssue);
    Eigen::MatrixXd got = a;
    CHECK_FALSE(cholesky_in_place(got));
}

TEST_CASE("the blocked triangular solve equals Eigen's triangular solve to rounding", "[cholesky]") {
    const Eigen::Index size = GENERATE(1, 9, 32, 33, 65, 130);
    const Eigen::Index cols = GENERATE(1, 5, 32);
    Eigen::MatrixXd factor = spd_matrix(size, 555U + static_cast<std::uint64_t>(size));
    REQUIRE(cholesky_in_place(factor));
    splitmix64 rng{static_cast<std::uint64_t>(size * 100 + cols)};
    const test::gaussian_draw<double> draw{0.0, 1.0};
    Eigen::MatrixXd b(size, cols);
    for (Eigen::Index k = 0; k < b.size(); ++k) b(k) = draw(rng);
    Eigen::MatrixXd got = b;
    solve_lower_in_place(factor, got);
    const Eigen::MatrixXd want = factor.triangularView<Eigen::Lower>().solve(b);
    const double rel = (got - want).cwiseAbs().maxCoeff() / want.cwiseAbs().maxCoeff();
    CAPTURE(size, cols, rel);
    // The factor's condition is near 2: the two solves' rounding differs by a few ulps.
    CHECK(rel < 1e-13);
}

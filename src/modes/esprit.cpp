#include "modes/esprit.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>

#include <Eigen/Dense>

namespace wane {

std::vector<std::complex<double>> esprit_poles(std::span<const std::complex<double>> y, const esprit_params& params) {
    using cmatrix = Eigen::MatrixXcd;
    const auto n = static_cast<Eigen::Index>(y.size());
    const Eigen::Index dim = std::min<Eigen::Index>(params.dimension, n / 3);
    if (dim < 3) return {};
    const Eigen::Index cols = n - dim + 1;
    const Eigen::Map<const Eigen::VectorXcd> samples(y.data(), n);
    // R = sum over columns m of y[m..m+L-1] y[m..m+L-1]^H, built from the Hankel data matrix.
    cmatrix data(dim, cols);
    for (Eigen::Index m = 0; m < cols; ++m) data.col(m) = samples.segment(m, dim);
    const cmatrix cov = data * data.adjoint();
    const Eigen::SelfAdjointEigenSolver<cmatrix> eig(cov);
    if (eig.info() != Eigen::Success) return {};
    const Eigen::VectorXd& values = eig.eigenvalues();  // ascending
    const double largest = values(dim - 1);
    if (!(largest > 0.0)) return {};
    std::vector<double> lower(values.data(), values.data() + dim / 2);
    std::nth_element(lower.begin(), lower.begin() + static_cast<std::ptrdiff_t>(lower.size() / 2), lower.end());
    const double noise = std::max(lower[lower.size() / 2], largest * 1e-15);
    const double floor_value = std::max(noise * params.signal_over_noise, largest * std::pow(10.0, -params.range_db / 10.0));
    int order = 0;
    for (Eigen::Index i = dim - 1; i >= 0 && values(i) > floor_value; --i) ++order;
    order = std::min({order, params.max_order, static_cast<int>(dim) - 1});
    if (params.fixed_order > 0) order = std::min(params.fixed_order, static_cast<int>(dim) - 1);
    if (order == 0) return {};
    const cmatrix u = eig.eigenvectors().rightCols(order);
    const cmatrix u1 = u.topRows(dim - 1);
    const cmatrix u2 = u.bottomRows(dim - 1);
    const cmatrix phi = u1.completeOrthogonalDecomposition().solve(u2);
    const Eigen::ComplexEigenSolver<cmatrix> poles(phi, false);
    if (poles.info() != Eigen::Success) return {};
    std::vector<std::complex<double>> out(poles.eigenvalues().data(), poles.eigenvalues().data() + order);
    return out;
}

}  // namespace wane

#include "modes/shifted_products.hpp"

#include <array>
#include <cassert>
#include <cstring>
#include <vector>

#include "synthesis/kernel_clones.hpp"

namespace wane {

namespace {

/// Four doubles side by side (GCC/Clang vector extension): one AVX register, two SSE2 ones.
using lanes = double __attribute__((vector_size(32)));

/// The four real sums of W(i, j) for one i and the four columns j0 .. j0 + 3 into sums (rr, ir,
/// ri, ii; four lanes each): Eigen's 1 x 4 gebp step order (even k into c, odd k into d below the
/// largest multiple of 8, c += d, then the rest into c). re, im: u row-major (rows x cols). Each
/// lane's arithmetic is the scalar order's, so both clones give the same bits.
WANE_KERNEL_CLONES
void four_column_sums(const double* __restrict re, const double* __restrict im, std::size_t cols, std::size_t depth,
                      std::size_t i, std::size_t j0, double* __restrict sums) {
    lanes c_rr{}, c_ir{}, c_ri{}, c_ii{}, d_rr{}, d_ir{}, d_ri{}, d_ii{};
    const std::size_t peeled = depth & ~std::size_t{7};
    for (std::size_t k = 0; k < peeled; k += 2) {
        const double ar = re[k * cols + i], ai = im[k * cols + i], ar2 = re[(k + 1) * cols + i], ai2 = im[(k + 1) * cols + i];
        lanes br, bi, br2, bi2;
        std::memcpy(&br, re + (k + 1) * cols + j0, sizeof br), std::memcpy(&bi, im + (k + 1) * cols + j0, sizeof bi);
        std::memcpy(&br2, re + (k + 2) * cols + j0, sizeof br2), std::memcpy(&bi2, im + (k + 2) * cols + j0, sizeof bi2);
        c_rr = ar * br + c_rr, c_ir = ai * br + c_ir, c_ri = ar * bi + c_ri, c_ii = ai * bi + c_ii;
        d_rr = ar2 * br2 + d_rr, d_ir = ai2 * br2 + d_ir, d_ri = ar2 * bi2 + d_ri, d_ii = ai2 * bi2 + d_ii;
    }
    c_rr = c_rr + d_rr, c_ir = c_ir + d_ir, c_ri = c_ri + d_ri, c_ii = c_ii + d_ii;
    for (std::size_t k = peeled; k < depth; ++k) {
        const double ar = re[k * cols + i], ai = im[k * cols + i];
        lanes br, bi;
        std::memcpy(&br, re + (k + 1) * cols + j0, sizeof br), std::memcpy(&bi, im + (k + 1) * cols + j0, sizeof bi);
        c_rr = ar * br + c_rr, c_ir = ai * br + c_ir, c_ri = ar * bi + c_ri, c_ii = ai * bi + c_ii;
    }
    std::memcpy(sums, &c_rr, sizeof c_rr);
    std::memcpy(sums + 4, &c_ir, sizeof c_ir);
    std::memcpy(sums + 8, &c_ri, sizeof c_ri);
    std::memcpy(sums + 12, &c_ii, sizeof c_ii);
}

/// W(i, j0 .. j0 + 3) from four_column_sums.
void four_columns(const std::vector<double>& re, const std::vector<double>& im, Eigen::Index cols, Eigen::Index depth,
                  Eigen::Index i, Eigen::Index j0, Eigen::MatrixXcd& w) {
    std::array<double, 16> s{};
    four_column_sums(re.data(), im.data(), static_cast<std::size_t>(cols), static_cast<std::size_t>(depth),
                     static_cast<std::size_t>(i), static_cast<std::size_t>(j0), s.data());
    for (std::size_t l = 0; l < 4; ++l)
        w(i, j0 + static_cast<Eigen::Index>(l)) = {s[l] + s[12 + l], -s[4 + l] + s[8 + l]};
}

/// W(i, j) for one column j in one run over k (Eigen's 1 x 1 gebp step order).
void one_column(const std::vector<double>& re, const std::vector<double>& im, Eigen::Index cols, Eigen::Index depth,
                Eigen::Index i, Eigen::Index j, Eigen::MatrixXcd& w) {
    double rr = 0.0, ir = 0.0, ri = 0.0, ii = 0.0;
    for (Eigen::Index k = 0; k < depth; ++k) {
        const auto a_at = static_cast<std::size_t>(k * cols + i), b_at = static_cast<std::size_t>((k + 1) * cols + j);
        const double ar = re[a_at], ai = im[a_at], br = re[b_at], bi = im[b_at];
        rr = ar * br + rr;
        ir = ai * br + ir;
        ri = ar * bi + ri;
        ii = ai * bi + ii;
    }
    w(i, j) = {rr + ii, -ir + ri};
}

}  // namespace

Eigen::MatrixXcd shifted_inner_products(const Eigen::MatrixXcd& u) {
    const Eigen::Index dim = u.rows(), cols = u.cols();
    assert(dim >= 2);
    const Eigen::Index depth = dim - 1;
    // Eigen's choice of path (generic_product_impl::evalTo and scaleAndAddTo, Eigen 3.4): the
    // coefficient-wise product below 20 (EIGEN_GEMM_TO_COEFFBASED_THRESHOLD), matrix-vector
    // products for one column, and blocking of the depth from 48 on.
    if (cols < 2 || depth + 2 * cols < 20 || depth >= 48) return u.topRows(depth).adjoint() * u.bottomRows(depth);
    std::vector<double> re(static_cast<std::size_t>(dim * cols)), im(re.size());
    for (Eigen::Index k = 0; k < dim; ++k)
        for (Eigen::Index j = 0; j < cols; ++j) {
            const auto at = static_cast<std::size_t>(k * cols + j);
            re[at] = u(k, j).real(), im[at] = u(k, j).imag();
        }
    Eigen::MatrixXcd w(cols, cols);
    const Eigen::Index grouped = cols & ~Eigen::Index{3};
    for (Eigen::Index i = 0; i < cols; ++i) {
        for (Eigen::Index j0 = 0; j0 < grouped; j0 += 4) four_columns(re, im, cols, depth, i, j0, w);
        for (Eigen::Index j = grouped; j < cols; ++j) one_column(re, im, cols, depth, i, j, w);
    }
    return w;
}

}  // namespace wane

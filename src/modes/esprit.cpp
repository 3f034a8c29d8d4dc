#include "modes/esprit.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <cstring>
#include <limits>
#include <vector>

#include <Eigen/Dense>

#include "modes/complex_eigenvalues.hpp"
#include "modes/hermitian_tridiagonal.hpp"
#include "modes/shifted_products.hpp"
#include "synthesis/kernel_clones.hpp"

namespace wane {

namespace {

using cmatrix = Eigen::MatrixXcd;

/// Phi = pinv(U1) U2 for a subspace basis u (dim x r, orthonormal columns), U1 = u without its
/// last row, U2 without its first. U1^H U1 = I - v v^H with v the adjoint of u's last row, whose
/// inverse is I + v v^H / (1 - |v|^2) (Sherman and Morrison 1950), so
/// Phi = W + v (v^H W) / (1 - |v|^2),  W = U1^H U2 (shifted_inner_products: from u's rows, the
/// bits of Eigen's product):  no factorization of U1. Near |v| = 1 (U1 close to rank deficient)
/// the complete orthogonal decomposition gives the minimum-norm solution.
cmatrix rotation(const cmatrix& u) {
    const Eigen::Index dim = u.rows();
    const auto u1 = u.topRows(dim - 1);
    const auto u2 = u.bottomRows(dim - 1);
    const Eigen::VectorXcd v = u.row(dim - 1).adjoint();
    const double rest = 1.0 - v.squaredNorm();
    if (!(rest > 1e-6)) return u1.completeOrthogonalDecomposition().solve(u2);
    cmatrix phi = shifted_inner_products(u);
    const Eigen::RowVectorXcd vh_phi = v.adjoint() * phi;
    phi.noalias() += (v / rest) * vh_phi;
    return phi;
}

/// Four doubles side by side (GCC/Clang vector extension): one AVX register, two SSE2 ones.
using lanes = double __attribute__((vector_size(32)));

/// out(i) = sum_{m < cols} y[m + i] conj y[m] for i < dim (y as re, im), four i at a time: each
/// sum over m in order, with the products of complex arithmetic (Re = ar br + ai bi,
/// Im = ai br - ar bi for a conj b). Compiled for AVX2 and the baseline (no FMA, the same bits).
WANE_KERNEL_CLONES
void lag_sums(const double* __restrict re, const double* __restrict im, std::size_t dim, std::size_t cols,
              double* __restrict out_re, double* __restrict out_im) {
    std::size_t i = 0;
    for (; i + 4 <= dim; i += 4) {
        lanes acc_r{}, acc_i{};
        for (std::size_t m = 0; m < cols; ++m) {
            lanes ar, ai;
            std::memcpy(&ar, re + m + i, sizeof ar), std::memcpy(&ai, im + m + i, sizeof ai);
            const double br = re[m], bi = im[m];
            acc_r += ar * br + ai * bi;
            acc_i += ai * br - ar * bi;
        }
        std::memcpy(out_re + i, &acc_r, sizeof acc_r), std::memcpy(out_im + i, &acc_i, sizeof acc_i);
    }
    for (; i < dim; ++i) {
        double acc_r = 0.0, acc_i = 0.0;
        for (std::size_t m = 0; m < cols; ++m) {
            acc_r += re[m + i] * re[m] + im[m + i] * im[m];
            acc_i += im[m + i] * re[m] - re[m + i] * im[m];
        }
        out_re[i] = acc_r, out_im[i] = acc_i;
    }
}

/// Column j of R's lower triangle from column j - 1 (rows j .. dim - 1), along each diagonal:
///   R(i, j) = R(i - 1, j - 1) - y[i - 1] conj y[j - 1] + y[cols + i - 1] conj y[cols + j - 1]
/// (the products of complex arithmetic: a conj b = (ar br + ai bi) + i (ai br - ar bi)). col_re,
/// col_im: column j; column j - 1 is dim entries before them. Compiled for AVX2 and the baseline
/// (no FMA, the same bits).
WANE_KERNEL_CLONES
void next_lag_column(const double* __restrict y_re, const double* __restrict y_im, std::size_t cols, std::size_t dim,
                     std::size_t j, double* __restrict col_re, double* __restrict col_im) {
    const double* prev_re = col_re - dim;
    const double* prev_im = col_im - dim;
    const double br = y_re[j - 1], bi = y_im[j - 1], er = y_re[cols + j - 1], ei = y_im[cols + j - 1];
    for (std::size_t i = j; i < dim; ++i) {
        const double ar = y_re[i - 1], ai = y_im[i - 1], cr = y_re[cols + i - 1], ci = y_im[cols + i - 1];
        col_re[i] = (prev_re[i - 1] - (ar * br + ai * bi)) + (cr * er + ci * ei);
        col_im[i] = (prev_im[i - 1] - (ai * br - ar * bi)) + (ci * er - cr * ei);
    }
}

/// The largest |entry| (std::abs, as cwiseAbs gives it) of the complex entries (re[k], im[k]),
/// k < size, found among those whose squared magnitude is within 1e-9 of the largest (one hypot
/// per candidate, not per entry).
double largest_magnitude(const double* re, const double* im, std::size_t size) {
    double top = 0.0;
    for (std::size_t k = 0; k < size; ++k) top = std::max(top, re[k] * re[k] + im[k] * im[k]);
    double out = 0.0;
    for (std::size_t k = 0; k < size; ++k)
        if (re[k] * re[k] + im[k] * im[k] >= top * (1.0 - 1e-9)) out = std::max(out, std::abs(std::complex<double>{re[k], im[k]}));
    return out;
}

/// R's eigen-decomposition (esprit_poles): the Householder tridiagonalization of R scaled to a
/// largest entry of 1 and the eigen-decomposition of its tridiagonal matrix; values ascending,
/// rescaled. ok is false when y is too short or the decomposition failed.
struct decomposition {
    Eigen::Index dim = 0;
    hermitian_tridiagonal own;               ///< R / scale = Q T Q^H
    tridiagonal_rotations rotations;         ///< with vectors: T's QR steps (tridiagonal_values)
    Eigen::VectorXd values;      ///< R's, ascending (with vectors: all; without: the `top` largest)
    Eigen::VectorXd t_values;    ///< without vectors: T's `top` largest (R's before the scaling), ascending
    bool ok = false;
};

/// The `count` largest eigenvalues of the symmetric tridiagonal T (diagonal diag, off-diagonal
/// off), ascending: bisection on the number of T's eigenvalues under x, the negative pivots of
/// T - x I's LDL^T factorization (the Sturm count; Barth, Martin and Wilkinson 1967, as LAPACK's
/// dstebz), a pivot nearer 0 than pivmin taken as -pivmin; each value bisected from Gershgorin's
/// bounds until its interval is within 4 ulps of the largest bound (and pivmin). The mode split's
/// ESPRIT needs only its few largest values (the shifts of top_tridiagonal_vectors): all 64 by QR
/// steps cost six times as much.
Eigen::VectorXd largest_tridiagonal_values(const Eigen::VectorXd& diag, const Eigen::VectorXd& off, int count) {
    const Eigen::Index n = diag.size();
    constexpr double huge = std::numeric_limits<double>::infinity();
    double lo = huge, hi = -huge, largest_off = 0.0;
    for (Eigen::Index i = 0; i < n; ++i) {
        const double radius = (i > 0 ? std::abs(off(i - 1)) : 0.0) + (i + 1 < n ? std::abs(off(i)) : 0.0);
        lo = std::min(lo, diag(i) - radius), hi = std::max(hi, diag(i) + radius);
        if (i + 1 < n) largest_off = std::max(largest_off, off(i) * off(i));
    }
    const double eps = std::numeric_limits<double>::epsilon();
    const double pivmin = std::max(std::numeric_limits<double>::min(), largest_off * std::numeric_limits<double>::min());
    const double span = std::max(std::abs(lo), std::abs(hi));
    lo -= 2.0 * eps * span + pivmin, hi += 2.0 * eps * span + pivmin;
    const Eigen::VectorXd off_squared = off.cwiseAbs2();
    // The number of eigenvalues under x.
    const auto under = [&](double x) {
        Eigen::Index negative = 0;
        double q = diag(0) - x;
        for (Eigen::Index i = 0;; ++i) {
            if (std::abs(q) < pivmin) q = -pivmin;
            if (q < 0.0) ++negative;
            if (i + 1 == n) return negative;
            q = (diag(i + 1) - x) - off_squared(i) / q;
        }
    };
    // Value k's interval [a_k, b_k] (its rank n - count + k among T's values, ascending); every
    // count narrows all of them (a value of rank under it lies below x, the others at or above).
    std::vector<double> a(static_cast<std::size_t>(count), lo), b(static_cast<std::size_t>(count), hi);
    const auto narrow = [&](double x, Eigen::Index below) {
        for (int j = 0; j < count; ++j) {
            const auto at = static_cast<std::size_t>(j);
            if (below > n - count + j) b[at] = std::min(b[at], x);
            else a[at] = std::max(a[at], x);
        }
    };
    Eigen::VectorXd out(count);
    for (int k = count; k-- > 0;) {  // the largest first
        const auto at = static_cast<std::size_t>(k);
        while (b[at] - a[at] > 4.0 * eps * span + pivmin) {
            const double mid = 0.5 * (a[at] + b[at]);
            if (mid <= a[at] || mid >= b[at]) break;
            narrow(mid, under(mid));
        }
        out(k) = 0.5 * (a[at] + b[at]);
    }
    return out;
}

/// top: without vectors, the number of largest eigenvalues made (largest_tridiagonal_values).
void decompose(std::span<const std::complex<double>> y, int dimension, decomposition& out, bool vectors = true, int top = 0) {
    const auto n = static_cast<Eigen::Index>(y.size());
    const Eigen::Index dim = std::min<Eigen::Index>(dimension, n / 3);
    out.dim = dim;
    if (dim < 3) return;
    const Eigen::Index cols = n - dim + 1;
    // R(i, j) = sum_{m < cols} y[m + i] conj y[m + j] (the Hankel data matrix times its adjoint),
    // its lower triangle (i >= j; the upper one stays 0: tridiagonalize reads the lower only):
    // the first column directly, then along each diagonal
    //   R(i + 1, j + 1) = R(i, j) - y[i] conj y[j] + y[cols + i] conj y[cols + j],
    // O(L N + L^2) instead of O(L^2 N).
    // Built on real and imaginary parts (column-major, re + i im), each entry by the products and
    // sums of complex arithmetic: a conj b = (ar br + ai bi) + i (ai br - ar bi).
    const auto d = static_cast<std::size_t>(dim), c = static_cast<std::size_t>(cols), size = d * d;
    std::vector<double> re(size), im(size);
    {
        const std::size_t n_y = y.size();
        std::vector<double> y_re(n_y), y_im(n_y);
        for (std::size_t k = 0; k < n_y; ++k) y_re[k] = y[k].real(), y_im[k] = y[k].imag();
        lag_sums(y_re.data(), y_im.data(), d, c, re.data(), im.data());  // column 0
        for (std::size_t j = 1; j < d; ++j)
            next_lag_column(y_re.data(), y_im.data(), c, d, j, re.data() + j * d, im.data() + j * d);
    }
    // The eigen-decomposition as Eigen's SelfAdjointEigenSolver makes it (R scaled to a largest
    // entry of 1, Householder tridiagonalization R = Q T Q^H with T real, implicit QR steps on T),
    // with the QR's rotations gathered in a real matrix V (T = V D V^T) and only the wanted
    // columns of Q V formed below: the eigenvectors of R are the columns of Q V. The
    // tridiagonalization and Q are modes/hermitian_tridiagonal.hpp's; without vectors, T's
    // eigenvalues alone (Eigen's computeFromTridiagonal).
    double scale = largest_magnitude(re.data(), im.data(), size);
    if (!(scale > 0.0)) scale = 1.0;
    for (std::size_t k = 0; k < size; ++k) re[k] /= scale, im[k] /= scale;
    out.own = tridiagonalize(std::move(re), std::move(im), static_cast<std::size_t>(dim));
    if (vectors) {
        if (!tridiagonal_values(out.own.diag, out.own.sub, out.values, out.rotations)) return;
        out.values *= scale;  // ascending
    } else {
        out.t_values = largest_tridiagonal_values(out.own.diag, out.own.sub, std::clamp<int>(top, 1, static_cast<int>(dim)));
        out.values = out.t_values * scale;  // ascending
    }
    out.ok = out.values(out.values.size() - 1) > 0.0;
}

/// Q v, the eigenvectors of R for T's eigenvectors v (dim x cols).
cmatrix basis_of(const decomposition& dec, const Eigen::MatrixXd& v) {
    std::vector<double> u_re, u_im;
    apply_q(dec.own, v, u_re, u_im);
    const Eigen::Index cols = v.cols();
    cmatrix u(dec.dim, cols);
    for (Eigen::Index r = 0; r < dec.dim; ++r)
        for (Eigen::Index c = 0; c < cols; ++c) {
            const auto at = static_cast<std::size_t>(r * cols + c);
            u(r, c) = {u_re[at], u_im[at]};
        }
    return u;
}

/// The poles of the subspace of the `order` largest eigenvalues (0 < order < dim): their
/// eigenvectors of T alone (tridiagonal_vectors), then Q applied.
std::vector<std::complex<double>> poles_of_order(const decomposition& dec, int order) {
    std::vector<double> u_re, u_im;
    std::size_t stride = 0;
    const auto cols = static_cast<std::size_t>(order);
    tridiagonal_vectors(dec.rotations, static_cast<std::size_t>(dec.dim) - cols, u_re, stride);
    apply_q_in_place(dec.own, stride, u_re, u_im);
    cmatrix u(dec.dim, order);
    for (Eigen::Index r = 0; r < dec.dim; ++r)
        for (std::size_t c = 0; c < cols; ++c) {
            const std::size_t at = static_cast<std::size_t>(r) * stride + c;
            u(r, static_cast<Eigen::Index>(c)) = {u_re[at], u_im[at]};
        }
    const cmatrix phi = rotation(u);
    return complex_eigenvalues(std::span(phi.data(), static_cast<std::size_t>(phi.size())), static_cast<std::size_t>(order));
}

/// Solves (T - shift I) x = b in place for the symmetric tridiagonal T (diagonal diag, off-diagonal
/// off), Gaussian elimination with partial pivoting (as LAPACK's dgtsv); a zero pivot is replaced
/// by `tiny` (inverse iteration: the shift is an eigenvalue, the solve meant to be near singular).
void shifted_tridiagonal_solve(const Eigen::VectorXd& diag, const Eigen::VectorXd& off, double shift, double tiny,
                               Eigen::VectorXd& b) {
    const Eigen::Index n = diag.size();
    Eigen::VectorXd d = diag.array() - shift, du = off, dl = off, du2 = Eigen::VectorXd::Zero(n);
    const auto pivot = [&](Eigen::Index i) {
        if (d(i) == 0.0) d(i) = tiny;
    };
    for (Eigen::Index i = 0; i + 1 < n; ++i) {
        if (std::abs(d(i)) >= std::abs(dl(i))) {
            pivot(i);
            const double fact = dl(i) / d(i);
            d(i + 1) -= fact * du(i);
            b(i + 1) -= fact * b(i);
        } else {  // rows i and i + 1 swapped
            const double fact = d(i) / dl(i);
            d(i) = dl(i);
            const double temp = d(i + 1);
            d(i + 1) = du(i) - fact * temp;
            if (i + 2 < n) {
                du2(i) = du(i + 1);
                du(i + 1) = -fact * du2(i);
            }
            du(i) = temp;
            const double bi = b(i);
            b(i) = b(i + 1);
            b(i + 1) = bi - fact * b(i + 1);
        }
    }
    pivot(n - 1);
    b(n - 1) /= d(n - 1);
    if (n > 1) b(n - 2) = (b(n - 2) - du(n - 2) * b(n - 1)) / d(n - 2);
    for (Eigen::Index i = n - 3; i >= 0; --i) b(i) = (b(i) - du(i) * b(i + 1) - du2(i) * b(i + 2)) / d(i);
}

/// The eigenvectors of the `count` largest eigenvalues (values ascending, its last `count` those) of the symmetric
/// tridiagonal T, as columns (the largest last), orthonormal: inverse iteration, three solves from
/// a fixed start, each result made orthogonal to the vectors already found (Gram-Schmidt, for
/// close eigenvalues) and normalized.
Eigen::MatrixXd top_tridiagonal_vectors(const Eigen::VectorXd& diag, const Eigen::VectorXd& off, const Eigen::VectorXd& values,
                                        int count) {
    const Eigen::Index n = diag.size();
    const double norm = diag.cwiseAbs().maxCoeff() + 2.0 * (off.size() > 0 ? off.cwiseAbs().maxCoeff() : 0.0);
    const double tiny = std::max(norm, 1e-300) * std::numeric_limits<double>::epsilon();
    Eigen::MatrixXd out(n, count);
    for (int k = 0; k < count; ++k) {
        const Eigen::Index col = count - 1 - k;  // the largest eigenvalue in the last column
        const double shift = values(values.size() - 1 - k);
        Eigen::VectorXd x(n);
        for (Eigen::Index i = 0; i < n; ++i) x(i) = 1.0 + 0.1 * static_cast<double>(i % 7);
        for (int iteration = 0; iteration < 3; ++iteration) {
            shifted_tridiagonal_solve(diag, off, shift, tiny, x);
            for (Eigen::Index c = col + 1; c < count; ++c) x -= out.col(c).dot(x) * out.col(c);
            x /= x.norm();
        }
        out.col(col) = x;
    }
    return out;
}

}  // namespace

std::vector<std::complex<double>> esprit_poles(std::span<const std::complex<double>> y, const esprit_params& params) {
    decomposition dec;
    decompose(y, params.dimension, dec);
    if (!dec.ok) return {};
    const Eigen::Index dim = dec.dim;
    const Eigen::VectorXd& values = dec.values;
    const double largest = values(dim - 1);
    std::vector<double> lower(values.data(), values.data() + dim / 2);
    std::nth_element(lower.begin(), lower.begin() + static_cast<std::ptrdiff_t>(lower.size() / 2), lower.end());
    const double noise = std::max(lower[lower.size() / 2], largest * 1e-15);
    const double floor_value = std::max(noise * params.signal_over_noise, largest * std::pow(10.0, -params.range_db / 10.0));
    int order = 0;
    for (Eigen::Index i = dim - 1; i >= 0 && values(i) > floor_value; --i) ++order;
    order = std::min({order, params.max_order, static_cast<int>(dim) - 1});
    if (params.fixed_order > 0) order = std::min(params.fixed_order, static_cast<int>(dim) - 1);
    if (order == 0) return {};
    return poles_of_order(dec, order);
}

std::vector<std::vector<std::complex<double>>> esprit_poles_by_order(std::span<const std::complex<double>> y,
                                                                     int dimension, int max_order) {
    std::vector<std::vector<std::complex<double>>> out(static_cast<std::size_t>(std::max(max_order, 0)));
    decomposition dec;
    decompose(y, dimension, dec, false, max_order);
    if (!dec.ok || max_order < 1) return out;
    // The eigenvectors of the largest orders once (order r's basis is the last r of them): T's by
    // inverse iteration, then Q applied to them (hermitian_tridiagonal's reflections).
    const int widest = std::min(max_order, static_cast<int>(dec.dim) - 1);
    const Eigen::MatrixXd v = top_tridiagonal_vectors(dec.own.diag, dec.own.sub, dec.t_values, widest);
    const cmatrix u = basis_of(dec, v);
    for (int order = 1; order <= max_order; ++order) {
        const int r = std::min(order, widest);
        const cmatrix phi = rotation(u.rightCols(r));
        out[static_cast<std::size_t>(order - 1)] =
            complex_eigenvalues(std::span(phi.data(), static_cast<std::size_t>(phi.size())), static_cast<std::size_t>(r));
    }
    return out;
}

}  // namespace wane

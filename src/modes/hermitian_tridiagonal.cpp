#include "modes/hermitian_tridiagonal.hpp"

#include <cassert>
#include <cmath>
#include <limits>
#include <utility>

#include <Eigen/Jacobi>

#include "synthesis/kernel_clones.hpp"

namespace wane {

namespace {

/// A22 <- H^H A22 H for H = I - tau v v^H (v[0] = 1) on the trailing m x m block of the n x n
/// matrix (re, im: column-major, whole), first row/column `first`: p = tau A22 v, alpha =
/// -tau (p^H v) / 2, p += alpha v, A22 -= v p^H + p v^H (zhetd2). p_re/p_im: m entries of work.
/// No two pointers overlap.
WANE_KERNEL_CLONES
void reflect_both_sides(double* __restrict re, double* __restrict im, std::size_t n, std::size_t first,
                        const double* __restrict v_re, const double* __restrict v_im, double tau_re, double tau_im,
                        double* __restrict p_re, double* __restrict p_im) {
    const std::size_t m = n - first;
    for (std::size_t i = 0; i < m; ++i) p_re[i] = 0.0, p_im[i] = 0.0;
    for (std::size_t j = 0; j < m; ++j) {  // p += A22(:, j) v_j
        const double* cr = re + (first + j) * n + first;
        const double* ci = im + (first + j) * n + first;
        const double vr = v_re[j], vi = v_im[j];
        for (std::size_t i = 0; i < m; ++i) {
            p_re[i] += cr[i] * vr - ci[i] * vi;
            p_im[i] += cr[i] * vi + ci[i] * vr;
        }
    }
    double dot_re = 0.0, dot_im = 0.0;  // p^H v before the scaling by tau: (tau p)^H v = conj(tau) dot
    for (std::size_t i = 0; i < m; ++i) {
        const double pr = tau_re * p_re[i] - tau_im * p_im[i], pim = tau_re * p_im[i] + tau_im * p_re[i];
        p_re[i] = pr, p_im[i] = pim;
        dot_re += pr * v_re[i] + pim * v_im[i];
        dot_im += pr * v_im[i] - pim * v_re[i];
    }
    const double alpha_re = -0.5 * (tau_re * dot_re - tau_im * dot_im), alpha_im = -0.5 * (tau_re * dot_im + tau_im * dot_re);
    for (std::size_t i = 0; i < m; ++i) {
        const double vr = v_re[i], vi = v_im[i];
        p_re[i] += alpha_re * vr - alpha_im * vi;
        p_im[i] += alpha_re * vi + alpha_im * vr;
    }
    for (std::size_t j = 0; j < m; ++j) {  // A22(:, j) -= v conj(p_j) + p conj(v_j)
        double* cr = re + (first + j) * n + first;
        double* ci = im + (first + j) * n + first;
        const double pr = p_re[j], pim = -p_im[j], vr = v_re[j], vi = -v_im[j];
        for (std::size_t i = 0; i < m; ++i) {
            cr[i] -= (v_re[i] * pr - v_im[i] * pim) + (p_re[i] * vr - p_im[i] * vi);
            ci[i] -= (v_re[i] * pim + v_im[i] * pr) + (p_re[i] * vi + p_im[i] * vr);
        }
    }
}

/// u <- (I - tau w w^H) u on `rows` rows of `cols` columns (row-major real and imaginary parts),
/// w = [1; w_re + i w_im]: t = w^H u and s = tau t per column (tr, ti, sr, si: cols each), each
/// step a multiply-add across the columns of a row. No two pointers overlap.
WANE_KERNEL_CLONES
void reflect_rows(double* __restrict re, double* __restrict im, std::size_t rows, std::size_t cols,
                  const double* __restrict w_re, const double* __restrict w_im, double tau_re, double tau_im,
                  double* __restrict tr, double* __restrict ti, double* __restrict sr, double* __restrict si) {
    for (std::size_t c = 0; c < cols; ++c) tr[c] = re[c], ti[c] = im[c];
    for (std::size_t i = 1; i < rows; ++i) {
        const double wr = w_re[i - 1], wi = w_im[i - 1];
        const double* ur = re + i * cols;
        const double* ui = im + i * cols;
        for (std::size_t c = 0; c < cols; ++c) {
            tr[c] += wr * ur[c] + wi * ui[c];
            ti[c] += wr * ui[c] - wi * ur[c];
        }
    }
    for (std::size_t c = 0; c < cols; ++c) {
        sr[c] = tau_re * tr[c] - tau_im * ti[c];
        si[c] = tau_re * ti[c] + tau_im * tr[c];
        re[c] -= sr[c], im[c] -= si[c];
    }
    for (std::size_t i = 1; i < rows; ++i) {
        const double wr = w_re[i - 1], wi = w_im[i - 1];
        double* ur = re + i * cols;
        double* ui = im + i * cols;
        for (std::size_t c = 0; c < cols; ++c) {
            ur[c] -= wr * sr[c] - wi * si[c];
            ui[c] -= wr * si[c] + wi * sr[c];
        }
    }
}

/// Columns x, y (count entries each) <- (c x + ms y, c y - ms x): Eigen's rotation in the plane of
/// two columns (applyOnTheRight with a rotation (c, s), ms = -s), the same two products and one
/// sum per entry as its scalar and packet loops.
WANE_KERNEL_CLONES
void rotate_columns(double* __restrict x, double* __restrict y, std::size_t count, double c, double ms) {
    for (std::size_t i = 0; i < count; ++i) {
        const double xi = x[i], yi = y[i];
        x[i] = c * xi + ms * yi;
        y[i] = c * yi - ms * xi;
    }
}

/// One implicit QR step with Wilkinson's shift on rows start .. end of the tridiagonal matrix
/// (Eigen's internal::tridiagonal_qr_step, written out), the rotations applied to q's columns.
void tridiagonal_qr_step(Eigen::VectorXd& diag, Eigen::VectorXd& sub, Eigen::Index start, Eigen::Index end, Eigen::MatrixXd& q) {
    const double td = (diag[end - 1] - diag[end]) * 0.5;
    const double e = sub[end - 1];
    double mu = diag[end];
    if (td == 0.0) {
        mu -= std::abs(e);
    } else if (e != 0.0) {
        const double e2 = e * e;
        const double h = Eigen::numext::hypot(td, e);  // Eigen's, not std::hypot (another rounding)
        if (e2 == 0.0) {
            mu -= e / ((td + (td > 0.0 ? h : -h)) / e);
        } else {
            mu -= e2 / (td + (td > 0.0 ? h : -h));
        }
    }
    double x = diag[start] - mu;
    double z = sub[start];
    for (Eigen::Index k = start; k < end && z != 0.0; ++k) {
        Eigen::JacobiRotation<double> rot;
        rot.makeGivens(x, z);
        const double c = rot.c(), s = rot.s();
        const double sdk = s * diag[k] + c * sub[k];
        const double dkp1 = s * sub[k] + c * diag[k + 1];
        diag[k] = c * (c * diag[k] - s * sub[k]) - s * (c * sub[k] - s * diag[k + 1]);
        diag[k + 1] = s * sdk + c * dkp1;
        sub[k] = c * sdk - s * dkp1;
        if (k > start) sub[k - 1] = c * sub[k - 1] - s * z;
        x = sub[k];
        if (k < end - 1) {
            z = -s * sub[k + 1];
            sub[k + 1] = c * sub[k + 1];
        }
        if (!(c == 1.0 && s == 0.0)) rotate_columns(q.col(k).data(), q.col(k + 1).data(), static_cast<std::size_t>(q.rows()), c, -s);
    }
}

}  // namespace

bool tridiagonal_eigen(Eigen::VectorXd diag, Eigen::VectorXd sub, Eigen::VectorXd& values, Eigen::MatrixXd& vectors) {
    const Eigen::Index n = diag.size();
    vectors.setIdentity(n, n);
    constexpr Eigen::Index max_iterations = 30;  // Eigen's m_maxIterations, times n
    const double zero = std::numeric_limits<double>::min();
    const double precision_inv = 1.0 / std::numeric_limits<double>::epsilon();
    Eigen::Index end = n - 1, start = 0, iter = 0;
    while (end > 0) {
        for (Eigen::Index i = start; i < end; ++i) {
            if (std::abs(sub[i]) < zero) {
                sub[i] = 0.0;
            } else {
                const double scaled = precision_inv * sub[i];
                if (scaled * scaled <= (std::abs(diag[i]) + std::abs(diag[i + 1]))) sub[i] = 0.0;
            }
        }
        while (end > 0 && sub[end - 1] == 0.0) end--;
        if (end <= 0) break;
        iter++;
        if (iter > max_iterations * n) break;
        start = end - 1;
        while (start > 0 && sub[start - 1] != 0.0) start--;
        tridiagonal_qr_step(diag, sub, start, end, vectors);
    }
    if (iter > max_iterations * n) return false;
    for (Eigen::Index i = 0; i < n - 1; ++i) {  // ascending, as Eigen sorts them
        Eigen::Index k = 0;
        diag.segment(i, n - i).minCoeff(&k);
        if (k > 0) {
            std::swap(diag[i], diag[k + i]);
            vectors.col(i).swap(vectors.col(k + i));
        }
    }
    values = std::move(diag);
    return true;
}

hermitian_tridiagonal tridiagonalize(std::vector<double> a_re, std::vector<double> a_im, std::size_t n) {
    assert(a_re.size() == n * n && a_im.size() == n * n && n >= 2);
    hermitian_tridiagonal out{.n = n, .diag = Eigen::VectorXd(static_cast<Eigen::Index>(n)),
                              .sub = Eigen::VectorXd(static_cast<Eigen::Index>(n - 1)), .tau = std::vector<std::complex<double>>(n - 1),
                              .w_re = std::vector<double>(n * n, 0.0), .w_im = std::vector<double>(n * n, 0.0)};
    std::vector<double> v_re(n), v_im(n), p_re(n), p_im(n);
    for (std::size_t k = 0; k + 1 < n; ++k) {
        // zlarfg on x = A(k + 1 .., k): H^H x = beta e_1, beta real, v = [1; x(1 ..) / (alpha - beta)].
        const std::size_t top = k + 1, m = n - top;
        const double ar = a_re[k * n + top], ai = a_im[k * n + top];
        double rest = 0.0;  // |x(1 ..)|^2
        for (std::size_t i = top + 1; i < n; ++i) rest += a_re[k * n + i] * a_re[k * n + i] + a_im[k * n + i] * a_im[k * n + i];
        std::complex<double> tau{};
        double beta = ar;
        v_re[0] = 1.0, v_im[0] = 0.0;  // v(1 ..) is written below before it is read, and read only there
        if (rest > 0.0 || ai != 0.0) {
            beta = -std::copysign(std::sqrt(ar * ar + ai * ai + rest), ar);
            tau = {(beta - ar) / beta, -ai / beta};
            const std::complex<double> scale = 1.0 / std::complex<double>{ar - beta, ai};
            for (std::size_t i = 1; i < m; ++i) {
                const std::complex<double> v = scale * std::complex<double>{a_re[k * n + top + i], a_im[k * n + top + i]};
                v_re[i] = v.real(), v_im[i] = v.imag();
                out.w_re[k * n + i - 1] = v.real(), out.w_im[k * n + i - 1] = v.imag();
            }
            reflect_both_sides(a_re.data(), a_im.data(), n, top, v_re.data(), v_im.data(), tau.real(), tau.imag(),
                               p_re.data(), p_im.data());
        }
        out.tau[k] = tau;
        out.sub(static_cast<Eigen::Index>(k)) = beta;
    }
    for (std::size_t k = 0; k < n; ++k) out.diag(static_cast<Eigen::Index>(k)) = a_re[k * n + k];
    return out;
}

void apply_q(const hermitian_tridiagonal& t, const Eigen::MatrixXd& v, std::vector<double>& out_re,
             std::vector<double>& out_im) {
    const std::size_t n = t.n, cols = static_cast<std::size_t>(v.cols());
    assert(static_cast<std::size_t>(v.rows()) == n);
    out_re.resize(n * cols);
    out_im.assign(n * cols, 0.0);
    for (std::size_t r = 0; r < n; ++r)
        for (std::size_t c = 0; c < cols; ++c) out_re[r * cols + c] = v(static_cast<Eigen::Index>(r), static_cast<Eigen::Index>(c));
    std::vector<double> work(4 * cols);
    for (std::size_t k = n - 1; k-- > 0;) {  // H_(n-2) first, H_0 last
        if (t.tau[k] == std::complex<double>{}) continue;
        const std::size_t top = k + 1;
        reflect_rows(out_re.data() + top * cols, out_im.data() + top * cols, n - top, cols, t.w_re.data() + k * n,
                     t.w_im.data() + k * n, t.tau[k].real(), t.tau[k].imag(), work.data(), work.data() + cols,
                     work.data() + 2 * cols, work.data() + 3 * cols);
    }
}

}  // namespace wane

#include "modes/hermitian_tridiagonal.hpp"

#include <cassert>
#include <cmath>
#include <cstring>
#include <limits>
#include <utility>

#include <Eigen/Jacobi>

#include "synthesis/kernel_clones.hpp"

namespace wane {

namespace {

/// Four doubles side by side (GCC/Clang vector extension): one AVX register, two SSE2 ones.
using lanes = double __attribute__((vector_size(32)));

/// Rows of padding under each column of tridiagonalize's work matrix: its four-lane loops run
/// past the last row into them (held at 0) instead of a scalar remainder.
constexpr std::size_t pad_rows = 4;

/// A four-lane load and store of doubles at any alignment, always inlined: no call passes a
/// vector, so GCC's note that such a call's ABI depends on AVX (-Wpsabi) does not apply to this
/// file and is silenced here.
#if defined(__GNUC__) && !defined(__clang__)
#pragma GCC diagnostic ignored "-Wpsabi"
#endif
[[gnu::always_inline]] inline lanes load(const double* p) {
    lanes v;
    std::memcpy(&v, p, sizeof v);
    return v;
}
[[gnu::always_inline]] inline void store(double* p, lanes v) { std::memcpy(p, &v, sizeof v); }

/// A22 <- H^H A22 H for H = I - tau v v^H (v[0] = 1) on the trailing m x m block of the matrix
/// (re, im: column-major, leading dimension ld = n + pad_rows; only the lower triangle read or
/// written), first row/column `first` (zhetd2's zhemv and zher2, lower): p = tau A22 v, A22's upper
/// entries the conjugates of the lower ones (its diagonal real), alpha = -tau (p^H v) / 2,
/// p += alpha v, A22 -= v p^H + p v^H on and below the diagonal: half the multiply-adds of the
/// whole update. Each column's sum of conj(A(i, j)) v_i (i > j) runs in four lanes; every loop
/// over a column runs in whole lanes into the padding rows (v, p and the padding rows 0 there, so
/// they stay 0). v_re/v_im and p_re/p_im: m + pad_rows entries. No two pointers overlap.
WANE_KERNEL_CLONES
void reflect_both_sides(double* __restrict re, double* __restrict im, std::size_t n, std::size_t first,
                        const double* __restrict v_re, const double* __restrict v_im, double tau_re, double tau_im,
                        double* __restrict p_re, double* __restrict p_im) {
    const std::size_t m = n - first, ld = n + pad_rows;
    for (std::size_t i = 0; i < m + pad_rows; ++i) p_re[i] = 0.0, p_im[i] = 0.0;
    for (std::size_t j = 0; j < m; ++j) {  // p += A22(:, j) v_j, column j below the diagonal and its conjugate row
        const double* cr = re + (first + j) * ld + first;
        const double* ci = im + (first + j) * ld + first;
        const double vr = v_re[j], vi = v_im[j];
        lanes sum_r{}, sum_i{};
        for (std::size_t i = j + 1; i < m; i += 4) {
            const lanes ar = load(cr + i), ai = load(ci + i), wr = load(v_re + i), wi = load(v_im + i);
            store(p_re + i, load(p_re + i) + (ar * vr - ai * vi));
            store(p_im + i, load(p_im + i) + (ar * vi + ai * vr));
            sum_r += ar * wr + ai * wi, sum_i += ar * wi - ai * wr;
        }
        p_re[j] += cr[j] * vr + ((sum_r[0] + sum_r[1]) + (sum_r[2] + sum_r[3]));
        p_im[j] += cr[j] * vi + ((sum_i[0] + sum_i[1]) + (sum_i[2] + sum_i[3]));
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
    for (std::size_t j = 0; j < m; ++j) {  // A22(j .., j) -= v conj(p_j) + p conj(v_j)
        double* cr = re + (first + j) * ld + first;
        double* ci = im + (first + j) * ld + first;
        const double pr = p_re[j], pim = -p_im[j], vr = v_re[j], vi = -v_im[j];
        for (std::size_t i = j; i < m; i += 4) {
            const lanes wr = load(v_re + i), wi = load(v_im + i), qr = load(p_re + i), qi = load(p_im + i);
            store(cr + i, load(cr + i) - ((wr * pr - wi * pim) + (qr * vr - qi * vi)));
            store(ci + i, load(ci + i) - ((wr * pim + wi * pr) + (qr * vi + qi * vr)));
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
/// (Eigen's internal::tridiagonal_qr_step, written out), each rotation (k, c, s) but the identity
/// handed to on_rotation (applied to the eigenvectors' columns k, k + 1).
template <class OnRotation>
void tridiagonal_qr_step(Eigen::VectorXd& diag, Eigen::VectorXd& sub, Eigen::Index start, Eigen::Index end,
                         const OnRotation& on_rotation) {
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
        if (!(c == 1.0 && s == 0.0)) on_rotation(k, c, s);
    }
}

/// Eigen's computeFromTridiagonal iteration on (diag, sub): its deflation test, its iteration
/// limit (false past it), the rotations to on_rotation; then the values ascending by its
/// selection sort, on_swap(i, j) for each exchange of values i and j.
template <class OnRotation, class OnSwap>
bool tridiagonal_iterate(Eigen::VectorXd& diag, Eigen::VectorXd& sub, const OnRotation& on_rotation, const OnSwap& on_swap) {
    const Eigen::Index n = diag.size();
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
        if (iter > max_iterations * n) return false;
        start = end - 1;
        while (start > 0 && sub[start - 1] != 0.0) start--;
        tridiagonal_qr_step(diag, sub, start, end, on_rotation);
    }
    for (Eigen::Index i = 0; i < n - 1; ++i) {  // ascending, as Eigen sorts them
        Eigen::Index k = 0;
        diag.segment(i, n - i).minCoeff(&k);
        if (k > 0) {
            std::swap(diag[i], diag[k + i]);
            on_swap(i, k + i);
        }
    }
    return true;
}

/// Rows x, y (count entries each) <- (c x + s y, c y - s x): a rotation of tridiagonal_values
/// applied from the left, in four lanes (count a multiple of 4).
WANE_KERNEL_CLONES
void rotate_rows(double* __restrict x, double* __restrict y, std::size_t count, double c, double s) {
    for (std::size_t i = 0; i < count; i += 4) {
        const lanes xi = load(x + i), yi = load(y + i);
        store(x + i, c * xi + s * yi);
        store(y + i, c * yi - s * xi);
    }
}

}  // namespace

bool tridiagonal_eigen(Eigen::VectorXd diag, Eigen::VectorXd sub, Eigen::VectorXd& values, Eigen::MatrixXd& vectors) {
    vectors.setIdentity(diag.size(), diag.size());
    const auto rotate = [&](Eigen::Index k, double c, double s) {
        rotate_columns(vectors.col(k).data(), vectors.col(k + 1).data(), static_cast<std::size_t>(vectors.rows()), c, -s);
    };
    if (!tridiagonal_iterate(diag, sub, rotate, [&](Eigen::Index i, Eigen::Index j) { vectors.col(i).swap(vectors.col(j)); }))
        return false;
    values = std::move(diag);
    return true;
}

bool tridiagonal_values(Eigen::VectorXd diag, Eigen::VectorXd sub, Eigen::VectorXd& values, tridiagonal_rotations& rotations) {
    const Eigen::Index n = diag.size();
    rotations.n = static_cast<std::size_t>(n);
    rotations.at.clear(), rotations.c.clear(), rotations.s.clear();
    rotations.column.resize(rotations.n);
    for (std::size_t i = 0; i < rotations.n; ++i) rotations.column[i] = i;
    const auto keep = [&](Eigen::Index k, double c, double s) {
        rotations.at.push_back(static_cast<std::size_t>(k)), rotations.c.push_back(c), rotations.s.push_back(s);
    };
    const auto swap = [&](Eigen::Index i, Eigen::Index j) { std::swap(rotations.column[static_cast<std::size_t>(i)], rotations.column[static_cast<std::size_t>(j)]); };
    if (!tridiagonal_iterate(diag, sub, keep, swap)) return false;
    values = std::move(diag);
    return true;
}

void tridiagonal_vectors(const tridiagonal_rotations& rotations, std::size_t first, std::vector<double>& out, std::size_t& stride) {
    const std::size_t n = rotations.n, cols = n - first;
    stride = (cols + 3) / 4 * 4;
    out.assign(n * stride, 0.0);
    for (std::size_t c = 0; c < cols; ++c) out[rotations.column[first + c] * stride + c] = 1.0;
    for (std::size_t t = rotations.at.size(); t-- > 0;) {
        const std::size_t k = rotations.at[t];
        rotate_rows(out.data() + k * stride, out.data() + (k + 1) * stride, stride, rotations.c[t], rotations.s[t]);
    }
}

hermitian_tridiagonal tridiagonalize(std::vector<double> a_re, std::vector<double> a_im, std::size_t n) {
    assert(a_re.size() == n * n && a_im.size() == n * n && n >= 2);
    hermitian_tridiagonal out{.n = n, .diag = Eigen::VectorXd(static_cast<Eigen::Index>(n)),
                              .sub = Eigen::VectorXd(static_cast<Eigen::Index>(n - 1)), .tau = std::vector<std::complex<double>>(n - 1),
                              .w_re = std::vector<double>(n * n, 0.0), .w_im = std::vector<double>(n * n, 0.0)};
    // The lower triangle, each column followed by pad_rows zeros (reflect_both_sides).
    const std::size_t ld = n + pad_rows;
    std::vector<double> w_re(ld * n, 0.0), w_im(ld * n, 0.0);
    for (std::size_t j = 0; j < n; ++j)
        for (std::size_t i = j; i < n; ++i) w_re[j * ld + i] = a_re[j * n + i], w_im[j * ld + i] = a_im[j * n + i];
    std::vector<double> v_re(n + pad_rows, 0.0), v_im(n + pad_rows, 0.0), p_re(n + pad_rows), p_im(n + pad_rows);
    for (std::size_t k = 0; k + 1 < n; ++k) {
        // zlarfg on x = A(k + 1 .., k): H^H x = beta e_1, beta real, v = [1; x(1 ..) / (alpha - beta)].
        const std::size_t top = k + 1, m = n - top;
        const double* col_re = w_re.data() + k * ld;
        const double* col_im = w_im.data() + k * ld;
        const double ar = col_re[top], ai = col_im[top];
        double rest = 0.0;  // |x(1 ..)|^2
        for (std::size_t i = top + 1; i < n; ++i) rest += col_re[i] * col_re[i] + col_im[i] * col_im[i];
        std::complex<double> tau{};
        double beta = ar;
        v_re[0] = 1.0, v_im[0] = 0.0;  // v(1 .. m - 1) is written below before it is read, and read only there
        if (rest > 0.0 || ai != 0.0) {
            beta = -std::copysign(std::sqrt(ar * ar + ai * ai + rest), ar);
            tau = {(beta - ar) / beta, -ai / beta};
            const std::complex<double> scale = 1.0 / std::complex<double>{ar - beta, ai};
            for (std::size_t i = 1; i < m; ++i) {
                const std::complex<double> v = scale * std::complex<double>{col_re[top + i], col_im[top + i]};
                v_re[i] = v.real(), v_im[i] = v.imag();
                out.w_re[k * n + i - 1] = v.real(), out.w_im[k * n + i - 1] = v.imag();
            }
            for (std::size_t i = m; i < m + pad_rows; ++i) v_re[i] = 0.0, v_im[i] = 0.0;
            reflect_both_sides(w_re.data(), w_im.data(), n, top, v_re.data(), v_im.data(), tau.real(), tau.imag(),
                               p_re.data(), p_im.data());
        }
        out.tau[k] = tau;
        out.sub(static_cast<Eigen::Index>(k)) = beta;
    }
    for (std::size_t k = 0; k < n; ++k) out.diag(static_cast<Eigen::Index>(k)) = w_re[k * ld + k];
    return out;
}

void apply_q(const hermitian_tridiagonal& t, const Eigen::MatrixXd& v, std::vector<double>& out_re,
             std::vector<double>& out_im) {
    const std::size_t n = t.n, cols = static_cast<std::size_t>(v.cols());
    assert(static_cast<std::size_t>(v.rows()) == n);
    out_re.resize(n * cols);
    for (std::size_t r = 0; r < n; ++r)
        for (std::size_t c = 0; c < cols; ++c) out_re[r * cols + c] = v(static_cast<Eigen::Index>(r), static_cast<Eigen::Index>(c));
    apply_q_in_place(t, cols, out_re, out_im);
}

void apply_q_in_place(const hermitian_tridiagonal& t, std::size_t cols, std::vector<double>& re, std::vector<double>& im) {
    const std::size_t n = t.n;
    assert(re.size() == n * cols);
    im.assign(n * cols, 0.0);
    std::vector<double> work(4 * cols);
    for (std::size_t k = n - 1; k-- > 0;) {  // H_(n-2) first, H_0 last
        if (t.tau[k] == std::complex<double>{}) continue;
        const std::size_t top = k + 1;
        reflect_rows(re.data() + top * cols, im.data() + top * cols, n - top, cols, t.w_re.data() + k * n,
                     t.w_im.data() + k * n, t.tau[k].real(), t.tau[k].imag(), work.data(), work.data() + cols,
                     work.data() + 2 * cols, work.data() + 3 * cols);
    }
}

}  // namespace wane

#include "modes/complex_eigenvalues.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <cstring>
#include <utility>

#include <Eigen/Dense>

#include "modes/hessenberg_reduction.hpp"
#include "synthesis/kernel_clones.hpp"

namespace wane {

namespace {

using cmatrix = Eigen::MatrixXcd;
using index = Eigen::Index;

/// |re| + |im|: the 1-norm of a complex number, which the deflation test and the shift use.
double norm1(std::complex<double> v) { return std::abs(v.real()) + std::abs(v.imag()); }

/// Four doubles side by side (GCC/Clang vector extension): one AVX register, two SSE2 ones.
using lanes = double __attribute__((vector_size(32)));

/// The rotation [x; y] <- [c x + conj(s) y; c y - s x] of two neighbouring rows (entry k of x at
/// xy + 2 k stride as re, im, y's right after it): c real, s complex, the products and sums of
/// complex arithmetic written out, all four parts of an entry pair in one set of lanes:
/// [xr, xi, yr, yi] <- c [xr, xi, yr, yi] + ([sr, sr, -sr, -sr] [yr, yi, xr, xi]
/// + [si, -si, si, -si] [yi, yr, xi, xr]), lane by lane the scalar order (-(a - b) = -a + b and
/// a - b = a + -b exactly), so both clones give the same bits.
WANE_KERNEL_CLONES
void rotate(double* __restrict xy, index count, index stride, double c, double sr, double si) {
    const lanes a = {sr, sr, -sr, -sr}, b = {si, -si, si, -si};
    for (index k = 0; k < count; ++k) {
        double* at = xy + 2 * k * stride;
        lanes v;
        std::memcpy(&v, at, sizeof v);
        const lanes p = __builtin_shufflevector(v, v, 2, 3, 0, 1), q = __builtin_shufflevector(v, v, 3, 2, 1, 0);
        v = c * v + (a * p + b * q);
        std::memcpy(at, &v, sizeof v);
    }
}

/// rotate of two columns (stride 1): the same arithmetic, two entries of each column in one set
/// of lanes: x <- c x + ([sr, sr] y + [si, -si] y'), y <- c y + ([-sr, -sr] x + [si, -si] x')
/// (x' the parts of each entry swapped), lane by lane the scalar order.
WANE_KERNEL_CLONES
void rotate_columns(double* __restrict x, double* __restrict y, index count, double c, double sr, double si) {
    const lanes a = {sr, sr, sr, sr}, b = {si, -si, si, -si}, a2 = {-sr, -sr, -sr, -sr};
    index k = 0;
    for (; k + 2 <= count; k += 2) {
        lanes u, v;
        std::memcpy(&u, x + 2 * k, sizeof u), std::memcpy(&v, y + 2 * k, sizeof v);
        const lanes us = __builtin_shufflevector(u, u, 1, 0, 3, 2), vs = __builtin_shufflevector(v, v, 1, 0, 3, 2);
        const lanes nu = c * u + (a * v + b * vs), nv = c * v + (a2 * u + b * us);
        std::memcpy(x + 2 * k, &nu, sizeof nu), std::memcpy(y + 2 * k, &nv, sizeof nv);
    }
    for (; k < count; ++k) {
        const double xr = x[2 * k], xi = x[2 * k + 1], yr = y[2 * k], yi = y[2 * k + 1];
        x[2 * k] = c * xr + (sr * yr + si * yi), x[2 * k + 1] = c * xi + (sr * yi - si * yr);
        y[2 * k] = c * yr - (sr * xr - si * xi), y[2 * k + 1] = c * yi - (sr * xi + si * xr);
    }
}

/// A plane rotation G = [c, -conj(s); s, c] (c real, c^2 + |s|^2 = 1) with G [p; q] = [r; 0]:
/// c = |p| / h, s = -c q / p, r = h p / |p|, h = sqrt(|p|^2 + |q|^2) (p = 0: c = 0, s = -q / |q|,
/// r = |q|; p = q = 0: the identity), on p and q scaled by their largest part. Eigen's makeGivens
/// gives the same rotation up to the sign of c and s.
struct givens {
    double c = 1.0;
    std::complex<double> s{0.0, 0.0}, r{0.0, 0.0};
};

givens make_givens(std::complex<double> p, std::complex<double> q) {
    double pr = p.real(), pi_ = p.imag(), qr = q.real(), qi = q.imag();
    const double top = std::max({std::abs(pr), std::abs(pi_), std::abs(qr), std::abs(qi)});
    if (!(top > 0.0)) return {};
    const double inv = 1.0 / top;
    pr *= inv, pi_ *= inv, qr *= inv, qi *= inv;
    const double p2 = pr * pr + pi_ * pi_, q2 = qr * qr + qi * qi;
    const double h = std::sqrt(p2 + q2);
    if (p2 == 0.0) {
        const double qa = std::sqrt(q2);
        return {.c = 0.0, .s = {-qr / qa, -qi / qa}, .r = {top * qa, 0.0}};
    }
    const double pa = std::sqrt(p2);
    const double k = 1.0 / (pa * h);  // s = -(q conj p) / (|p| h)
    const double rk = top * h / pa;   // r = p h / |p|, unscaled
    return {.c = pa / h, .s = {-(qr * pr + qi * pi_) * k, -(qi * pr - qr * pi_) * k}, .r = {pr * rk, pi_ * rk}};
}

/// The complex entry as its real and imaginary parts (std::complex's array layout).
double* parts(std::complex<double>& v) { return reinterpret_cast<double*>(&v); }

/// Hessenberg matrix h (n x n) with the QR steps' bookkeeping.
struct hessenberg {
    cmatrix h;
    std::complex<double>& at(index row, index col) { return h(row, col); }
    std::complex<double> at(index row, index col) const { return h(row, col); }

    /// Subdiagonal entry (i + 1, i) negligible beside its two diagonal neighbours (then set to 0).
    bool negligible(index i) {
        const double d = norm1(at(i, i)) + norm1(at(i + 1, i + 1));
        if (norm1(at(i + 1, i)) <= d * Eigen::NumTraits<double>::epsilon()) {
            at(i + 1, i) = 0.0;
            return true;
        }
        return false;
    }

    /// The shift for a step on the block ending at row iu, the iter-th on this eigenvalue: the
    /// eigenvalue of the trailing 2 x 2 block nearer its last diagonal entry, the 2 x 2 scaled to
    /// a 1-norm of 1 first; after 10 and 20 steps the exceptional shift of comqr.
    std::complex<double> shift(index iu, int iter) const {
        if ((iter == 10 || iter == 20) && iu >= 2) return std::abs(at(iu, iu - 1).real()) + std::abs(at(iu - 1, iu - 2).real());
        Eigen::Matrix2cd t;
        t << at(iu - 1, iu - 1), at(iu - 1, iu), at(iu, iu - 1), at(iu, iu);
        const double normt = t.cwiseAbs().sum();
        t /= normt;
        const std::complex<double> b = t.coeff(0, 1) * t.coeff(1, 0);
        const std::complex<double> c = t.coeff(0, 0) - t.coeff(1, 1);
        const std::complex<double> disc = std::sqrt(c * c + 4.0 * b);
        const std::complex<double> det = t.coeff(0, 0) * t.coeff(1, 1) - b;
        const std::complex<double> trace = t.coeff(0, 0) + t.coeff(1, 1);
        std::complex<double> e1 = (trace + disc) / 2.0;
        std::complex<double> e2 = (trace - disc) / 2.0;
        // The larger root from the quadratic formula, the smaller from the determinant (no
        // cancellation); both 0 only when det is.
        if (norm1(e1) > norm1(e2)) e2 = det / e1;
        else if (norm1(e2) != 0.0) e1 = det / e2;
        return normt * (norm1(e1 - t.coeff(1, 1)) < norm1(e2 - t.coeff(1, 1)) ? e1 : e2);
    }

    /// One QR step on the active block [il, iu]: the first rotation makes a bulge at (il + 2, il),
    /// the next ones chase it down and out. Each rotation acts on two rows over the block's columns
    /// from the bulge on, and on two columns over the block's rows down to the bulge.
    void step(index il, index iu, std::complex<double> mu) {
        for (index i = il; i < iu; ++i) {
            index from_col = il;
            givens rot;
            if (i == il) {
                rot = make_givens(at(il, il) - mu, at(il + 1, il));
            } else {
                rot = make_givens(at(i, i - 1), at(i + 1, i - 1));
                at(i, i - 1) = rot.r;
                at(i + 1, i - 1) = 0.0;
                from_col = i;
            }
            const double c = rot.c;
            // Rows i, i + 1 by G (c, -s); columns i, i + 1 by G^H (c, -conj(s)).
            const std::complex<double> row_s = -rot.s, col_s = -std::conj(rot.s);
            rotate(parts(at(i, from_col)), iu - from_col + 1, h.rows(), c, row_s.real(), row_s.imag());
            rotate_columns(parts(at(il, i)), parts(at(il, i + 1)), std::min(i + 2, iu) - il + 1, c, col_s.real(), col_s.imag());
        }
    }
};

}  // namespace

std::vector<std::complex<double>> complex_eigenvalues(std::span<const std::complex<double>> a, std::size_t n) {
    assert(a.size() == n * n);
    if (n == 0) return {};
    if (!std::all_of(a.begin(), a.end(), [](std::complex<double> v) { return std::isfinite(v.real()) && std::isfinite(v.imag()); }))
        return {};
    const auto size = static_cast<index>(n);
    // Eigen's HessenbergDecomposition(a).matrixH(), bit for bit (modes/hessenberg_reduction).
    std::vector<double> re(n * n), im(n * n);
    for (std::size_t k = 0; k < n * n; ++k) re[k] = a[k].real(), im[k] = a[k].imag();
    reduce_to_hessenberg(re, im, n);
    hessenberg work{.h = cmatrix(size, size)};
    for (std::size_t k = 0; k < n * n; ++k) work.h(static_cast<index>(k)) = {re[k], im[k]};
    // Rows iu + 1 .. n - 1 are done (their eigenvalues on the diagonal), rows il .. iu the
    // active block (work.at(il, il - 1) == 0).
    const long max_steps = 30L * size;
    long steps = 0;
    int iter = 0;  // steps on the current bottom eigenvalue
    for (index iu = size - 1;;) {
        while (iu > 0 && work.negligible(iu - 1)) {
            iter = 0;
            --iu;
        }
        if (iu == 0) break;
        if (++steps > max_steps) return {};
        ++iter;
        index il = iu - 1;
        while (il > 0 && !work.negligible(il - 1)) --il;
        work.step(il, iu, work.shift(iu, iter));
    }
    std::vector<std::complex<double>> out(n);
    for (std::size_t i = 0; i < n; ++i) out[i] = work.at(static_cast<index>(i), static_cast<index>(i));
    // Ascending magnitude by selection (the first least of the rest each time), each magnitude
    // taken once (std::abs, the same value at every compare).
    std::vector<double> magnitude(n);
    for (std::size_t i = 0; i < n; ++i) magnitude[i] = std::abs(out[i]);
    for (std::size_t i = 0; i < n; ++i) {
        const auto least = static_cast<std::size_t>(
            std::min_element(magnitude.begin() + static_cast<std::ptrdiff_t>(i), magnitude.end()) - magnitude.begin());
        std::swap(out[i], out[least]);
        std::swap(magnitude[i], magnitude[least]);
    }
    return out;
}

}  // namespace wane

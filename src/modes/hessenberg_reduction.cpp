#include "modes/hessenberg_reduction.hpp"

#include <cassert>
#include <cmath>
#include <complex>
#include <limits>
#include <vector>

#include "synthesis/kernel_clones.hpp"

namespace wane {

namespace {

/// y[r] -= s x[r] for r < count (s = sr + i si; the product re = sr xr - si xi, im = sr xi + si xr).
/// No two pointers overlap.
WANE_KERNEL_CLONES
void subtract_scaled(double* __restrict yr, double* __restrict yi, const double* __restrict xr, const double* __restrict xi,
                     std::size_t count, double sr, double si) {
    for (std::size_t r = 0; r < count; ++r) {
        const double pr = sr * xr[r] - si * xi[r], pi = sr * xi[r] + si * xr[r];
        yr[r] = yr[r] - pr, yi[r] = yi[r] - pi;
    }
}

/// acc[r] += x[r] s for r < count (the product re = xr sr - xi si, im = xr si + xi sr, then the
/// add). No two pointers overlap.
WANE_KERNEL_CLONES
void add_product(double* __restrict ar, double* __restrict ai, const double* __restrict xr, const double* __restrict xi,
                 std::size_t count, double sr, double si) {
    for (std::size_t r = 0; r < count; ++r) {
        const double tr = xr[r] * sr - xi[r] * si, ti = xr[r] * si + xi[r] * sr;
        ar[r] = tr + ar[r], ai[r] = ti + ai[r];
    }
}

/// The matrix's parts and the work vectors of one reduction.
struct reduction {
    std::span<double> re, im;
    std::size_t n;
    std::vector<double> er, ei, tr, ti, ur, ui;  ///< essential part, w, tau times a vector

    [[nodiscard]] std::size_t at(std::size_t row, std::size_t col) const { return col * n + row; }

    /// The reflector of column i (rows i + 1 ..): essential part into er/ei and below the
    /// subdiagonal, beta on it; returns tau (makeHouseholderInPlace's arithmetic).
    std::complex<double> reflector(std::size_t i) {
        const std::size_t rem = n - i - 1, b0 = i + 1;
        const double c0r = re[at(b0, i)], c0i = im[at(b0, i)];
        double tail = 0.0;  // squared norm of the rest, summed in order
        for (std::size_t k = 1; k < rem; ++k) {
            const double vr = re[at(b0 + k, i)], vi = im[at(b0 + k, i)];
            tail = k == 1 ? vr * vr + vi * vi : tail + (vr * vr + vi * vi);
        }
        double beta = c0r;
        std::complex<double> tau{};
        const double tol = std::numeric_limits<double>::min();
        if (tail <= tol && c0i * c0i <= tol) {
            for (std::size_t k = 0; k + 1 < rem; ++k) er[k] = 0.0, ei[k] = 0.0;
        } else {
            beta = std::sqrt((c0r * c0r + c0i * c0i) + tail);
            if (c0r >= 0.0) beta = -beta;
            const double dr = c0r - beta, di = c0i, d2 = dr * dr + di * di;
            for (std::size_t k = 0; k + 1 < rem; ++k) {  // v / (c0 - beta) = v conj(d) / |d|^2
                const double ar = re[at(b0 + 1 + k, i)], ai = im[at(b0 + 1 + k, i)];
                er[k] = (ar * dr - ai * (-di)) / d2, ei[k] = (ar * (-di) + ai * dr) / d2;
            }
            tau = {(beta - c0r) / beta, -((0.0 - c0i) / beta)};  // conj((beta - c0) / beta)
        }
        for (std::size_t k = 0; k + 1 < rem; ++k) re[at(b0 + 1 + k, i)] = er[k], im[at(b0 + 1 + k, i)] = ei[k];
        re[at(b0, i)] = beta, im[at(b0, i)] = 0.0;
        return tau;
    }

    /// A22 <- H A22 on the trailing block from (b0, b0): w = v^H A22 column by column, row b0 -=
    /// tau w, the rows below -= (tau essential) w.
    void from_left(std::size_t b0, std::complex<double> tau) {
        const std::size_t rem = n - b0;
        if (rem == 1) {
            const double sr = 1.0 - tau.real(), si = 0.0 - tau.imag(), xr = re[at(b0, b0)], xi = im[at(b0, b0)];
            re[at(b0, b0)] = xr * sr - xi * si, im[at(b0, b0)] = xr * si + xi * sr;
            return;
        }
        if (tau == 0.0) return;
        const double taur = tau.real(), taui = tau.imag();
        for (std::size_t j = 0; j < rem; ++j) {
            const double* cr = &re[at(b0 + 1, b0 + j)];
            const double* ci = &im[at(b0 + 1, b0 + j)];
            double sr = 0.0, si = 0.0;
            for (std::size_t k = 0; k + 1 < rem; ++k) {  // A22(k, j) conj(essential_k)
                sr = (cr[k] * er[k] - ci[k] * (-ei[k])) + sr;
                si = (cr[k] * (-ei[k]) + ci[k] * er[k]) + si;
            }
            tr[j] = (0.0 + sr) + re[at(b0, b0 + j)], ti[j] = (0.0 + si) + im[at(b0, b0 + j)];
        }
        for (std::size_t j = 0; j < rem; ++j)
            re[at(b0, b0 + j)] -= taur * tr[j] - taui * ti[j], im[at(b0, b0 + j)] -= taur * ti[j] + taui * tr[j];
        for (std::size_t k = 0; k + 1 < rem; ++k) ur[k] = taur * er[k] - taui * ei[k], ui[k] = taur * ei[k] + taui * er[k];
        for (std::size_t j = 0; j < rem; ++j)
            subtract_scaled(&re[at(b0 + 1, b0 + j)], &im[at(b0 + 1, b0 + j)], ur.data(), ui.data(), rem - 1, tr[j], ti[j]);
    }

    /// A(:, b0 ..) <- A(:, b0 ..) H' for H' = I - tau' v v^H: w = A v row by row (over the
    /// columns in order), column b0 -= tau' w, the columns after -= (tau' w) conj(essential).
    void from_right(std::size_t b0, std::complex<double> tau) {
        const std::size_t rem = n - b0;
        const double sr = tau.real(), si = tau.imag();
        if (rem == 1) {
            const double fr = 1.0 - sr, fi = 0.0 - si;
            for (std::size_t r = 0; r < n; ++r) {
                const double xr = re[at(r, b0)], xi = im[at(r, b0)];
                re[at(r, b0)] = xr * fr - xi * fi, im[at(r, b0)] = xr * fi + xi * fr;
            }
            return;
        }
        if (tau == 0.0) return;
        for (std::size_t r = 0; r < n; ++r) tr[r] = 0.0, ti[r] = 0.0;
        for (std::size_t k = 0; k + 1 < rem; ++k)
            add_product(tr.data(), ti.data(), &re[at(0, b0 + 1 + k)], &im[at(0, b0 + 1 + k)], n, er[k], ei[k]);
        for (std::size_t r = 0; r < n; ++r) tr[r] = (0.0 + tr[r]) + re[at(r, b0)], ti[r] = (0.0 + ti[r]) + im[at(r, b0)];
        for (std::size_t r = 0; r < n; ++r) re[at(r, b0)] -= sr * tr[r] - si * ti[r], im[at(r, b0)] -= sr * ti[r] + si * tr[r];
        for (std::size_t r = 0; r < n; ++r) ur[r] = sr * tr[r] - si * ti[r], ui[r] = sr * ti[r] + si * tr[r];
        for (std::size_t k = 0; k + 1 < rem; ++k)
            subtract_scaled(&re[at(0, b0 + 1 + k)], &im[at(0, b0 + 1 + k)], ur.data(), ui.data(), n, er[k], -ei[k]);
    }
};

}  // namespace

void reduce_to_hessenberg(std::span<double> re, std::span<double> im, std::size_t n) {
    assert(re.size() == n * n && im.size() == n * n);
    reduction work{.re = re, .im = im, .n = n, .er = std::vector<double>(n), .ei = std::vector<double>(n),
                   .tr = std::vector<double>(n), .ti = std::vector<double>(n), .ur = std::vector<double>(n), .ui = std::vector<double>(n)};
    for (std::size_t i = 0; i + 1 < n; ++i) {
        const std::complex<double> tau = work.reflector(i);
        work.from_left(i + 1, tau);
        work.from_right(i + 1, std::conj(tau));
    }
    for (std::size_t c = 0; c < n; ++c)
        for (std::size_t r = c + 2; r < n; ++r) re[work.at(r, c)] = 0.0, im[work.at(r, c)] = 0.0;
}

}  // namespace wane

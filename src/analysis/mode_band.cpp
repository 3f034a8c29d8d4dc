// The band of a target around a partial's frequency (see mode_band.hpp).
#include "analysis/mode_band.hpp"

#include <array>
#include <cassert>
#include <algorithm>
#include <cmath>
#include <cstring>

#include "core/units.hpp"
#include "synthesis/kernel_clones.hpp"

namespace wane {

namespace {

using cvec = std::vector<std::complex<double>>;

/// One block's moments M_q = sum_j j^q v[j], v[j] = x[j] phasor[j] (band_of), j from `from` to
/// phasor.size() - 1, xb[0] being x at j = from; summed in j order.
struct block_moments {
    std::complex<double> m0, m1, m2;
};

block_moments moments_of(const float* xb, std::size_t from, std::span<const std::complex<double>> phasor) {
    std::complex<double> m0{}, m1{}, m2{};
    for (std::size_t j = from; j < phasor.size(); ++j) {
        const std::complex<double> w = static_cast<double>(xb[j - from]) * phasor[j];
        const auto jd = static_cast<double>(j);
        m0 += w;
        m1 += jd * w;
        m2 += (jd * jd) * w;
    }
    return {m0, m1, m2};
}

/// Four doubles side by side (GCC/Clang vector extensions: one AVX register, two SSE registers).
using lanes = double __attribute__((vector_size(32)));

/// One whole block's moments (j from 0; x the block's sample at j = 0), four consecutive j side by
/// side: lane l sums j = l mod 4, the lanes added at the end (m0, m1, m2 each summed in that
/// order: a different rounding from moments_of's, within a few ulps of the block's magnitude), the
/// j left past the last four in moments_of's order. The phasor as real and imaginary parts apart.
/// Compiled for AVX2 and the baseline (synthesis/kernel_clones.hpp: no FMA, the same bits). j and
/// j^2 come from tables (band_of: exact integers, the same values as counting j in the lanes).
WANE_KERNEL_CLONES
block_moments moments_of_whole(const float* __restrict x, const double* __restrict phasor_re,
                               const double* __restrict phasor_im, const double* __restrict j_of,
                               const double* __restrict jj_of, std::size_t d) {
    lanes m0r{}, m0i{}, m1r{}, m1i{}, m2r{}, m2i{};
    std::size_t j = 0;
    for (; j + 4 <= d; j += 4) {
        const lanes xv{static_cast<double>(x[j]), static_cast<double>(x[j + 1]), static_cast<double>(x[j + 2]),
                       static_cast<double>(x[j + 3])};
        lanes pr, pi, jv, jj;
        std::memcpy(&pr, phasor_re + j, sizeof pr), std::memcpy(&pi, phasor_im + j, sizeof pi);
        std::memcpy(&jv, j_of + j, sizeof jv), std::memcpy(&jj, jj_of + j, sizeof jj);
        const lanes wr = xv * pr, wi = xv * pi;
        m0r += wr, m0i += wi;
        m1r += jv * wr, m1i += jv * wi;
        m2r += jj * wr, m2i += jj * wi;
    }
    const auto total = [](const lanes& v) { return (v[0] + v[1]) + (v[2] + v[3]); };
    block_moments out{{total(m0r), total(m0i)}, {total(m1r), total(m1i)}, {total(m2r), total(m2i)}};
    for (; j < d; ++j) {
        const std::complex<double> w = static_cast<double>(x[j]) * std::complex<double>{phasor_re[j], phasor_im[j]};
        const auto jd = static_cast<double>(j);
        out.m0 += w;
        out.m1 += jd * w;
        out.m2 += (jd * jd) * w;
    }
    return out;
}

}  // namespace

/// The band of x around freq_hz (mode_band.hpp): v = x moved to 0 Hz, three causal running means of d
/// samples (m[n] = (1/d) sum_{j < d, j <= n} in[n - j]), sampled every d samples from the first
/// output whose means lie wholly inside x (n = 3 (d - 1)), so band sample m covers
/// x[m d, m d + 3 d - 2] and a mode c z^n reads c' (z^d)^m.
/// The three means are one kernel h[k] = c(k) / d^3, k < 3 d - 2, c(k) the number of ways
/// k = a + b + e with a, b, e < d: c(k) = T(k) - 3 T(k - d) + 3 T(k - 2 d), T(x) = (x + 2)(x + 1) / 2
/// (the terms with x >= 0), a quadratic in k on each third [0, d), [d, 2 d), [2 d, 3 d). So with
/// blocks b of d samples starting at b d - 2, block sample j (x[b d - 2 + j]) has k = (3 - p) d - 1 - j
/// in output m = b - p (p = 0, 1, 2), and band[m] = sum_p (al_p M0 + be_p M1 + ga_p M2)(block m + p)
/// / d^3 with the block moments M_q = sum_j j^q v[b d - 2 + j]: one pass, no division per sample.
/// v's phasor is the block's exp(-i 2 pi f (b d - 2) / fs) times a table of exp(-i 2 pi f j / fs).
cvec band_of(std::span<const float> x, double freq_hz, double sample_rate_hz, std::size_t d) {
    assert(d >= 3);
    const std::size_t size = x.size();
    const std::size_t first = 3 * (d - 1);
    const std::size_t outputs = size > first ? (size - 1 - first) / d + 1 : 0;
    cvec out(outputs);
    if (outputs == 0) return out;
    const auto dd = static_cast<double>(d);
    // c(k) on third p (k = (3 - p) d - 1 - j) as al + be j + ga j^2, fitted through j = 0, 1, 2 (exact:
    // integers, and c is quadratic there).
    const auto tri = [](double v) { return 0.5 * (v + 2.0) * (v + 1.0); };
    const auto count_on = [&](int p, double j) {
        const double k = (3.0 - p) * dd - 1.0 - j;
        return tri(k) - (p <= 1 ? 3.0 * tri(k - dd) : 0.0) + (p == 0 ? 3.0 * tri(k - 2.0 * dd) : 0.0);
    };
    double al[3], be[3], ga[3];
    for (int p = 0; p < 3; ++p) {
        const double g0 = count_on(p, 0.0), g1 = count_on(p, 1.0), g2 = count_on(p, 2.0);
        ga[p] = 0.5 * (g2 - 2.0 * g1 + g0);
        be[p] = g1 - g0 - ga[p];
        al[p] = g0;
    }
    cvec phasor(d);
    for (std::size_t j = 0; j < d; ++j) phasor[j] = std::polar(1.0, -two_pi * freq_hz * static_cast<double>(j) / sample_rate_hz);
    const double scale = 1.0 / (dd * dd * dd);
    // Block b's moments into the outputs it reaches, in block order.
    const auto add_block = [&](std::size_t b, const block_moments& m) {
        const std::complex<double> start =
            std::polar(1.0, -two_pi * freq_hz * (static_cast<double>(b * d) - 2.0) / sample_rate_hz);
        for (std::size_t p = 0; p < 3; ++p) {
            if (b < p || b - p >= outputs) continue;
            out[b - p] += scale * start * (al[p] * m.m0 + be[p] * m.m1 + ga[p] * m.m2);
        }
    };
    // Block b: x[b d - 2 + j], j < d (the two samples before x[0] are none: block 0 from j = 2).
    const std::size_t blocks = outputs + 2;
    add_block(0, moments_of(x.data(), 2, phasor));
    std::vector<double> phasor_re(d), phasor_im(d), j_of(d), jj_of(d);
    for (std::size_t j = 0; j < d; ++j) {
        phasor_re[j] = phasor[j].real(), phasor_im[j] = phasor[j].imag();
        j_of[j] = static_cast<double>(j), jj_of[j] = j_of[j] * j_of[j];
    }
    for (std::size_t b = 1; b < blocks; ++b)
        add_block(b, moments_of_whole(x.data() + (b * d - 2), phasor_re.data(), phasor_im.data(), j_of.data(),
                                      jj_of.data(), d));
    return out;
}

double late_band_error_db(std::span<const std::complex<double>> rec, std::span<const std::complex<double>> cand,
                          double band_rate_hz, const late_band_span& span, int* blocks_read) {
    const auto per_block = std::max<std::size_t>(1, static_cast<std::size_t>(std::lround(span.block_s * band_rate_hz)));
    const std::size_t blocks = std::min(rec.size(), cand.size()) / per_block;
    std::vector<double> r(blocks), c(blocks);
    for (std::size_t b = 0; b < blocks; ++b) {
        for (std::size_t j = 0; j < per_block; ++j) {
            r[b] += std::norm(rec[b * per_block + j]);
            c[b] += std::norm(cand[b * per_block + j]);
        }
    }
    const double top = blocks > 0 ? *std::max_element(r.begin(), r.end()) : 0.0;
    double sum = 0.0;
    int count = 0;
    for (std::size_t b = 0; b < blocks; ++b) {
        if (static_cast<double>(b * per_block) / band_rate_hz < span.from_s) continue;
        if (!(r[b] > 0.0) || power_to_db(r[b] / top) < -span.range_db) break;
        sum += std::abs(power_to_db(std::max(c[b], 1e-300) / r[b]));
        ++count;
    }
    if (blocks_read != nullptr) *blocks_read = count;
    return count > 0 ? sum / count : 0.0;
}

}  // namespace wane

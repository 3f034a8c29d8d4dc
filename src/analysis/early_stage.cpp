// A strong partial's early stage refitted on the waveform (see early_stage.hpp).
#include "analysis/early_stage.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <cstring>

#include "core/units.hpp"
#include "synthesis/kernel_clones.hpp"

namespace wane {

namespace {

/// The span in blocks of block_frames frames (the last may be shorter): per block the sums
/// sum w^2 and sum d w, and the knots' weights at the block's centre, h0 (the start offset's: 1
/// before the attack's end, falling to 0 at the knee) and h1 (the knee's: rising from the
/// attack's end to 1 at the knee, falling to 0 at the join); past the join both are 0 and nothing
/// changes. The offset line is g = a0 h0 + a1 h1 (dB), taken as constant over a block: the
/// weights move by block_frames / ((knee_s - attack_s) rate) per block (0.03 for a knee 20 ms
/// after the attack's end at 48 kHz, 0.13 at the nearest, 5 ms). Structure of arrays.
struct stage_blocks {
    std::vector<double> ww, dw, h0, h1;
    std::size_t used = 0;  ///< blocks up to the join's
};

/// Four doubles side by side (GCC/Clang vector extension): one AVX register, two SSE2 ones.
using lanes = double __attribute__((vector_size(32)));

/// block_sums of four whole blocks at once, blocks first .. first + 3 in the lanes, each lane's
/// sums in the order of its block summed alone. Compiled for AVX2 and the baseline (no FMA: the
/// same bits).
WANE_KERNEL_CLONES
void four_block_sums(const double* __restrict d, const float* __restrict w, std::size_t first, std::size_t block_frames,
                     double* __restrict ww_out, double* __restrict dw_out) {
    lanes ww{}, dw{};
    const std::size_t at = first * block_frames;
    for (std::size_t n = 0; n < block_frames; ++n) {
        const lanes wn{static_cast<double>(w[at + n]), static_cast<double>(w[at + block_frames + n]),
                       static_cast<double>(w[at + 2 * block_frames + n]), static_cast<double>(w[at + 3 * block_frames + n])};
        const lanes dn{d[at + n], d[at + block_frames + n], d[at + 2 * block_frames + n], d[at + 3 * block_frames + n]};
        ww += wn * wn, dw += dn * wn;
    }
    std::memcpy(ww_out + first, &ww, sizeof ww), std::memcpy(dw_out + first, &dw, sizeof dw);
}

void block_sums(std::span<const double> d, std::span<const float> w, std::size_t block_frames, stage_blocks& b) {
    const std::size_t blocks = (w.size() + block_frames - 1) / block_frames;
    b.ww.assign(blocks, 0.0), b.dw.assign(blocks, 0.0), b.h0.resize(blocks), b.h1.resize(blocks);
    const std::size_t whole = w.size() / block_frames;  // the blocks of block_frames frames
    std::size_t k = 0;
    for (; k + 4 <= whole; k += 4) four_block_sums(d.data(), w.data(), k, block_frames, b.ww.data(), b.dw.data());
    for (; k < blocks; ++k) {
        const std::size_t end = std::min(w.size(), (k + 1) * block_frames);
        double ww = 0.0, dw = 0.0;
        for (std::size_t n = k * block_frames; n < end; ++n) {
            const auto wn = static_cast<double>(w[n]);
            ww += wn * wn, dw += d[n] * wn;
        }
        b.ww[k] = ww, b.dw[k] = dw;
    }
}

/// The knots' weights at each block's centre for one (knee_s, join_s).
void set_weights(double attack_s, double knee_s, double join_s, double rate_hz, std::size_t frames, std::size_t block_frames,
                 stage_blocks& b) {
    b.used = 0;
    for (std::size_t k = 0; k < b.ww.size(); ++k) {
        const std::size_t begin = k * block_frames, end = std::min(frames, begin + block_frames);
        const double t = 0.5 * static_cast<double>(begin + end - 1) / rate_hz;
        if (t >= join_s) break;
        const bool before = t < attack_s, rising = t < knee_s;
        b.h0[k] = before ? 1.0 : rising ? (knee_s - t) / (knee_s - attack_s) : 0.0;
        b.h1[k] = before ? 0.0 : rising ? (t - attack_s) / (knee_s - attack_s) : (join_s - t) / (join_s - knee_s);
        b.used = k + 1;
    }
}

/// The Gauss-Newton sums at offsets (a0, a1), per block with gain G = 10^(g / 20): the partial
/// with the offset u = G w, the residual with it e = d + (1 - G) w, its derivatives (negated)
/// J_i = c G h_i w; a = J^T J (2 x 2: a00, a01, a11), b = J^T e, change = sum (e^2 - d^2).
struct stage_sums {
    double a00 = 0.0, a01 = 0.0, a11 = 0.0, b0 = 0.0, b1 = 0.0, change = 0.0;
};

stage_sums sums_at(const stage_blocks& b, double a0, double a1) {
    constexpr double c = amp_neper_per_db;  // the gain 10^(g / 20) = e^(c g): dG/dg = c G
    stage_sums s;
    const bool zero = a0 == 0.0 && a1 == 0.0;  // the first step's sums: no gain to take
    for (std::size_t k = 0; k < b.used; ++k) {
        const double gain = zero ? 1.0 : std::exp(c * (a0 * b.h0[k] + a1 * b.h1[k])), keep = 1.0 - gain;
        const double jw = c * gain, ew = b.dw[k] + keep * b.ww[k];  // J_i = jw h_i w; sum e w
        const double jj = jw * jw * b.ww[k];
        s.a00 += jj * b.h0[k] * b.h0[k], s.a01 += jj * b.h0[k] * b.h1[k], s.a11 += jj * b.h1[k] * b.h1[k];
        s.b0 += jw * b.h0[k] * ew, s.b1 += jw * b.h1[k] * ew;
        s.change += keep * (2.0 * b.dw[k] + keep * b.ww[k]);
    }
    return s;
}

/// The offsets one Gauss-Newton step from (a0, a1), each within max_db; none where J^T J is singular.
std::optional<std::array<double, 2>> step_from(const stage_sums& s, double a0, double a1, double max_db) {
    const double det = s.a00 * s.a11 - s.a01 * s.a01;
    if (!(det > 1e-12 * s.a00 * s.a11)) return std::nullopt;
    const double d0 = (s.b0 * s.a11 - s.b1 * s.a01) / det, d1 = (s.b1 * s.a00 - s.b0 * s.a01) / det;
    return std::array<double, 2>{std::clamp(a0 + d0, -max_db, max_db), std::clamp(a1 + d1, -max_db, max_db)};
}

/// A bound on every pair's promise (fit_early_stage: b^T (J^T J)^-1 b at zero offsets, the energy
/// of d's projection on the pair's two columns h0 w and h1 w, blockwise). Each pair's h0 and h1
/// are continuous and piecewise linear in t with breaks at the attack's end, its knee and its join
/// (1 and 0 before the attack's end, 0 from the join on), so on the block centres they are sums of
/// the hat functions on the knots `knots` (the attack's end, then every knee and join of a pair
/// tried, ascending; the first hat 1 before the attack's end; none at the last knot, where every
/// pair's weights are 0): the pairs' columns lie in the span of the hats' columns, and d's
/// projection on that span is at least each pair's. Returns that projection's energy by a
/// Cholesky factor of the hats' Gram matrix (infinity where it fails: no bound then).
double promise_bound(const stage_blocks& b, std::span<const double> knots, double rate_hz, std::size_t frames,
                     std::size_t block_frames) {
    constexpr std::size_t most = 8;
    const std::size_t hats = knots.size() - 1;
    if (hats == 0) return 0.0;
    if (hats > most) return infinity;
    std::array<double, most * most> a{};  // row-major hats x hats
    std::array<double, most> rhs{};
    for (std::size_t k = 0; k < b.ww.size(); ++k) {
        const std::size_t begin = k * block_frames, end = std::min(frames, begin + block_frames);
        const double t = 0.5 * static_cast<double>(begin + end - 1) / rate_hz;  // as set_weights
        if (t >= knots[hats]) break;
        std::size_t j = 0;  // the hats j (weight 1 - f) and j + 1 (weight f) carry the block
        double f = 0.0;
        if (t >= knots[0]) {
            while (t >= knots[j + 1]) ++j;
            f = (t - knots[j]) / (knots[j + 1] - knots[j]);
        }
        const std::array<double, 2> v{1.0 - f, f};
        for (std::size_t r = 0; r < 2 && j + r < hats; ++r) {
            rhs[j + r] += v[r] * b.dw[k];
            for (std::size_t c = 0; c < 2 && j + c < hats; ++c) a[(j + r) * most + j + c] += v[r] * v[c] * b.ww[k];
        }
    }
    // L y = rhs with L L^T = a; the bound is |y|^2. A hat that holds no frame of w (a zero row) is left out.
    double bound = 0.0;
    for (std::size_t r = 0; r < hats; ++r) {
        if (!(a[r * most + r] > 0.0)) continue;
        const double diag = a[r * most + r];
        for (std::size_t c = 0; c < r; ++c) {
            double v = a[r * most + c];
            for (std::size_t m = 0; m < c; ++m) v -= a[r * most + m] * a[c * most + m];
            a[r * most + c] = a[c * most + c] > 0.0 ? v / a[c * most + c] : 0.0;
        }
        double pivot = diag;
        for (std::size_t m = 0; m < r; ++m) pivot -= a[r * most + m] * a[r * most + m];
        if (!(pivot > 1e-12 * diag)) return infinity;
        a[r * most + r] = std::sqrt(pivot);
        double y = rhs[r];
        for (std::size_t m = 0; m < r; ++m) y -= a[r * most + m] * rhs[m];
        rhs[r] = y / a[r * most + r];
        bound += rhs[r] * rhs[r];
    }
    return bound;
}

}  // namespace

std::optional<early_stage_fit> fit_early_stage(std::span<const double> d, std::span<const float> w, double attack_s,
                                               double rate_hz, double signal, const early_stage_params& params) {
    assert(w.size() <= d.size() && rate_hz > 0.0 && params.block_frames > 0);
    const double span_s = static_cast<double>(w.size()) / rate_hz;
    stage_blocks blocks;
    block_sums(d, w, params.block_frames, blocks);
    // No pair can promise min_fall where the hats' bound (promise_bound) stays under it; the margin
    // covers the rounding of the two computations (a relative 1e-3: far over it).
    std::vector<double> knots{attack_s};
    for (const double knee_s : params.knee_s)
        for (const double join_s : params.join_s)
            if (knee_s >= attack_s + params.min_knee_after_attack_s && join_s > knee_s && join_s <= span_s + 0.5 / rate_hz)
                knots.push_back(knee_s), knots.push_back(join_s);
    std::sort(knots.begin() + 1, knots.end());
    knots.erase(std::unique(knots.begin(), knots.end()), knots.end());
    if (promise_bound(blocks, knots, rate_hz, w.size(), params.block_frames) < 0.999 * params.min_fall * signal) return std::nullopt;
    const auto weigh = [&](double knee_s, double join_s) {
        set_weights(attack_s, knee_s, join_s, rate_hz, w.size(), params.block_frames, blocks);
    };
    // The pair whose first step (linear in the offsets) promises the largest fall: b^T (J^T J)^-1 b.
    std::optional<early_stage_fit> best;
    double best_promise = 0.0;
    for (const double knee_s : params.knee_s) {
        if (!(knee_s >= attack_s + params.min_knee_after_attack_s)) continue;
        for (const double join_s : params.join_s) {
            if (!(join_s > knee_s) || join_s > span_s + 0.5 / rate_hz) continue;
            weigh(knee_s, join_s);
            const stage_sums s = sums_at(blocks, 0.0, 0.0);
            const std::optional<std::array<double, 2>> a = step_from(s, 0.0, 0.0, infinity);
            if (!a) continue;
            const double promise = s.b0 * (*a)[0] + s.b1 * (*a)[1];
            if (promise > best_promise) {
                best_promise = promise;
                best = early_stage_fit{.knee_s = knee_s, .join_s = join_s, .start_db = 0.0, .knee_db = 0.0, .fall = 0.0};
            }
        }
    }
    if (!best || best_promise < params.min_fall * signal) return std::nullopt;
    // Gauss-Newton on that pair, each step's offsets kept while the model's residual falls.
    weigh(best->knee_s, best->join_s);
    stage_sums at = sums_at(blocks, 0.0, 0.0);
    for (int step = 0; step <= params.gauss_newton_steps; ++step) {
        const std::optional<std::array<double, 2>> a = step_from(at, best->start_db, best->knee_db, params.max_change_db);
        if (!a) break;
        const stage_sums next = sums_at(blocks, (*a)[0], (*a)[1]);
        if (!(next.change < -best->fall)) break;
        best->start_db = (*a)[0], best->knee_db = (*a)[1], best->fall = -next.change;
        at = next;
    }
    if (!(best->fall >= params.min_fall * signal)) return std::nullopt;
    return best;
}

envelope with_early_stage(const envelope& env, const early_stage_fit& fit) {
    assert(env.attack_s < fit.knee_s && fit.knee_s < fit.join_s && !env.decay.empty());
    const std::vector<envelope_piece> pieces = envelope_pieces(env);
    const double knee_db = envelope_level(env, pieces, fit.knee_s).db + fit.knee_db;
    const double join_db = envelope_level(env, pieces, fit.join_s).db;
    envelope out{.attack_s = env.attack_s, .peak = level_db{env.peak.db + fit.start_db}, .decay = {}};
    out.decay.push_back({.t60_s = slope_db_per_s_to_t60((knee_db - out.peak.db) / (fit.knee_s - env.attack_s)),
                         .until_s = fit.knee_s});
    out.decay.push_back({.t60_s = slope_db_per_s_to_t60((join_db - knee_db) / (fit.join_s - fit.knee_s)),
                         .until_s = fit.join_s});
    for (const envelope_piece& piece : pieces) {
        if (!(piece.end_s > fit.join_s)) continue;
        out.decay.push_back({.t60_s = slope_db_per_s_to_t60(piece.slope_db_per_s),
                             .until_s = std::isinf(piece.end_s) ? std::nullopt : std::optional<double>(piece.end_s)});
    }
    return out;
}

}  // namespace wane

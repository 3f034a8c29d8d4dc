// A strong partial's early stage refitted on the waveform (see early_stage.hpp).
#include "analysis/early_stage.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>

#include "core/units.hpp"

namespace wane {

namespace {

/// d(gain)/d(offset dB) / gain: ln(10) / 20 per dB (the gain is 10^(g / 20) = e^(c g)).
constexpr double neper_per_db_amp = 0.11512925464970229;

/// Frames [begin, end) over which the knots' two weights are straight lines in the frame: h0 (the
/// start offset's weight) and h1 (the knee's) at begin, and their steps per frame. The offset line
/// is g = a0 h0 + a1 h1 (dB).
struct stage_region {
    std::size_t begin = 0, end = 0;
    double h0 = 0.0, dh0 = 0.0, h1 = 0.0, dh1 = 0.0;
};

/// The three regions: before the attack's end (h0 = 1), attack end to knee (h0 falls to 0 as h1
/// rises to 1), knee to join (h1 falls to 0); past the join both are 0 and nothing changes.
std::array<stage_region, 3> regions_of(double attack_s, double knee_s, double join_s, double rate_hz, std::size_t frames) {
    const auto frame_at = [&](double s) { return std::min(frames, static_cast<std::size_t>(std::ceil(s * rate_hz))); };
    const std::size_t na = frame_at(attack_s), n1 = frame_at(knee_s), n2 = frame_at(join_s);
    const auto time_of = [&](std::size_t n) { return static_cast<double>(n) / rate_hz; };
    const double rise = 1.0 / ((knee_s - attack_s) * rate_hz), fall = 1.0 / ((join_s - knee_s) * rate_hz);
    const double h0_at_na = (knee_s - time_of(na)) / (knee_s - attack_s);
    return {{{.begin = 0, .end = na, .h0 = 1.0, .dh0 = 0.0, .h1 = 0.0, .dh1 = 0.0},
             {.begin = na, .end = n1, .h0 = h0_at_na, .dh0 = -rise, .h1 = 1.0 - h0_at_na, .dh1 = rise},
             {.begin = n1, .end = n2, .h0 = 0.0, .dh0 = 0.0, .h1 = (join_s - time_of(n1)) / (join_s - knee_s), .dh1 = -fall}}};
}

/// The Gauss-Newton sums at offsets (a0, a1): u = w 10^(g / 20) the partial with the offset, e =
/// d + w - u the residual with it, J_i = c u h_i the residual's derivatives (negated); a = J^T J
/// (2 x 2: a00, a01, a11), b = J^T e, and change = sum (e^2 - d^2), the residual energy's change.
struct stage_sums {
    double a00 = 0.0, a01 = 0.0, a11 = 0.0, b0 = 0.0, b1 = 0.0, change = 0.0;
};

stage_sums sums_at(std::span<const double> d, std::span<const float> w, const std::array<stage_region, 3>& regions,
                   double a0, double a1) {
    constexpr double c = neper_per_db_amp;
    stage_sums s;
    for (const stage_region& r : regions) {
        double h0 = r.h0, h1 = r.h1;
        double gain = std::exp(c * (a0 * h0 + a1 * h1));
        const double ratio = std::exp(c * (a0 * r.dh0 + a1 * r.dh1));  // the gain is geometric in a region
        for (std::size_t n = r.begin; n < r.end; ++n) {
            const double wn = static_cast<double>(w[n]);
            const double u = wn * gain, e = d[n] + (wn - u);
            const double j0 = c * u * h0, j1 = c * u * h1;
            s.a00 += j0 * j0, s.a01 += j0 * j1, s.a11 += j1 * j1;
            s.b0 += j0 * e, s.b1 += j1 * e;
            s.change += e * e - d[n] * d[n];
            gain *= ratio, h0 += r.dh0, h1 += r.dh1;
        }
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

}  // namespace

std::optional<early_stage_fit> fit_early_stage(std::span<const double> d, std::span<const float> w, double attack_s,
                                               double rate_hz, double signal, const early_stage_params& params) {
    assert(w.size() <= d.size() && rate_hz > 0.0);
    const double span_s = static_cast<double>(w.size()) / rate_hz;
    // The pair whose first step (linear in the offsets) promises the largest fall: b^T (J^T J)^-1 b.
    std::optional<early_stage_fit> best;
    double best_promise = 0.0;
    for (const double knee_s : params.knee_s) {
        if (!(knee_s >= attack_s + params.min_knee_after_attack_s)) continue;
        for (const double join_s : params.join_s) {
            if (!(join_s > knee_s) || join_s > span_s + 0.5 / rate_hz) continue;
            const stage_sums s = sums_at(d, w, regions_of(attack_s, knee_s, join_s, rate_hz, w.size()), 0.0, 0.0);
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
    // Gauss-Newton on that pair, each step's offsets kept while the exact residual falls.
    const std::array<stage_region, 3> regions = regions_of(attack_s, best->knee_s, best->join_s, rate_hz, w.size());
    stage_sums at = sums_at(d, w, regions, 0.0, 0.0);
    for (int step = 0; step <= params.gauss_newton_steps; ++step) {
        const std::optional<std::array<double, 2>> a = step_from(at, best->start_db, best->knee_db, params.max_change_db);
        if (!a) break;
        const stage_sums next = sums_at(d, w, regions, (*a)[0], (*a)[1]);
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

#include "analysis/burst_fit.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <limits>
#include <numbers>
#include <span>
#include <vector>

#include "core/units.hpp"

namespace wane {

namespace {

/// Points per window in the frame sums (reasoned choice: 64 points put 0.06 ms between points of
/// a 4 ms window, where the fastest burst fitted, T60 8 ms, moves 0.5 dB).
constexpr int window_points = 64;
/// Points of the T60 grid between min_t60_s and max_t60_s (log spaced, 20% apart over 8-500 ms),
/// and golden-section steps refining the best between its neighbours.
constexpr int t60_grid_points = 24;
constexpr int golden_steps = 16;
/// Most frames a fit takes (the noise model's attack span: 80 frames of 1 ms).
constexpr std::size_t max_fit_frames = 128;

/// The window's power at window_points positions across it, and their sum.
struct window_power {
    std::array<double, window_points> x{};   ///< position in the window, [0, 1]
    std::array<double, window_points> w2{};
    double total = 0.0;
    explicit window_power(window_kind window) {
        for (int k = 0; k < window_points; ++k) {
            const auto j = static_cast<std::size_t>(k);
            x[j] = (k + 0.5) / window_points;
            const double w = window_value(window, x[j]);
            w2[j] = w * w;
            total += w2[j];
        }
    }
};

/// The framed level of the header's burst (P = 0 dB) for one attack, hold and T60. A frame whose
/// window lies wholly in the decay sees the decay's line at its centre times the window's mean of
/// exp(-k (t - centre)), one number for all such frames (power decay rate k = 2 ln(1000) / T60:
/// amplitude -60 dB per T60); other frames are summed point by point, the decay's points by a
/// running product.
/// What a decay of one T60 gives every frame wholly inside it: k, the window's mean of
/// exp(-k (t - centre)) in dB, and exp(-k dt) between points (the same for every attack and hold).
struct decay_spread {
    double rate_per_s = 0.0;  ///< k
    double spread_db = 0.0;
    double step = 0.0;
    double spread_power = 0.0;  ///< the window's mean of exp(-k (t - centre)) (spread_db as a power)
    double hop_ratio = 0.0;     ///< exp(-k hop): one frame's power over the one before, wholly in the decay
    /// tail[j] = sum over i >= j of w2[i] step^(i - j): a frame whose decay starts at point j sums
    /// its decay points as exp(-k (t_j - decay start)) tail[j] (Horner's rule from the window's end).
    std::array<double, window_points> tail{};
    decay_spread() = default;
    decay_spread(const window_power& w, double window_s, double hop_s, double t60_s) : rate_per_s(2.0 * ln1000 / t60_s) {
        // The points are evenly spaced (window_power: x_j = (j + 1/2) / n), so exp(-k (x_j - 1/2) W)
        // is the first point's times step^j (a relative error of about j ulps, j < 64).
        step = std::exp(-rate_per_s * window_s / static_cast<double>(w.x.size()));
        double suffix = 0.0;
        for (std::size_t j = w.x.size(); j-- > 0;) {
            suffix = w.w2[j] + step * suffix;
            tail[j] = suffix;
        }
        spread_power = std::exp(-rate_per_s * (w.x[0] - 0.5) * window_s) * tail[0] / w.total;
        spread_db = power_to_db(spread_power);
        hop_ratio = std::exp(-rate_per_s * hop_s);
    }
};

struct framed_burst {
    const window_power* wp = nullptr;
    double window_s = 0.0;
    double attack_s = 0.0;
    double hold_s = 0.0;
    double rate_per_s = 0.0;    ///< k
    double spread_db = 0.0;     ///< 10 log10 of that window mean
    double step = 0.0;          ///< exp(-k dt) from one point to the next
    const decay_spread* fall = nullptr;  ///< the decay's sums (powers())
    framed_burst(const window_power& w, double window, double attack, double hold, const decay_spread& d)
        : wp(&w), window_s(window), attack_s(attack), hold_s(hold), rate_per_s(d.rate_per_s),
          spread_db(d.spread_db), step(d.step), fall(&d) {}
    /// The window points before the decay (the attack's ramp, the hold: the same for every T60):
    /// their weighted sum, and the first point in the decay (window_points when none).
    struct head {
        double weighted = 0.0;
        std::size_t first_decay = 0;
    };
    [[nodiscard]] head head_of(double centre_s) const {
        const double decay_from_s = attack_s + hold_s;
        const double start_s = centre_s - 0.5 * window_s;
        head h;
        for (; h.first_decay < wp->x.size(); ++h.first_decay) {
            const double t = start_s + wp->x[h.first_decay] * window_s;
            double g = 0.0;
            if (t < 0.0) {
                g = 0.0;
            } else if (t < attack_s) {
                g = (t / attack_s) * (t / attack_s);
            } else if (t < decay_from_s) {
                g = 1.0;
            } else {
                break;  // the points are in time order: the rest are in the decay
            }
            h.weighted += wp->w2[h.first_decay] * g;
        }
        return h;
    }
    /// The frame's level from its head (head_of(centre_s), of this attack and hold), dB.
    [[nodiscard]] double db(double centre_s, const head& h) const {
        const double decay_from_s = attack_s + hold_s;
        const double start_s = centre_s - 0.5 * window_s;
        if (start_s >= decay_from_s)
            return -rate_per_s * (centre_s - decay_from_s) * (10.0 / std::numbers::ln10) + spread_db;
        double weighted = h.weighted;
        double decay = -1.0;  // exp(-k (t - decay_from_s)) at the current point, once reached
        for (std::size_t j = h.first_decay; j < wp->x.size(); ++j) {
            const double t = start_s + wp->x[j] * window_s;
            decay = decay < 0.0 ? std::exp(-rate_per_s * (t - decay_from_s)) : decay * step;
            weighted += wp->w2[j] * decay;
        }
        return weighted > 0.0 ? power_to_db(weighted / wp->total) : -infinity;
    }
    [[nodiscard]] double db(double centre_s) const { return db(centre_s, head_of(centre_s)); }
    /// The frames' powers (db_to_power of db(), without the trip through dB) at centres
    /// (first + i) hop_s, i < out.size(), heads[i] their heads: a frame wholly in the decay is the
    /// one before it times exp(-k hop) (decay_spread::hop_ratio), from the window's mean spread
    /// times exp(-k (centre - decay start)) at the first such frame; a frame partly in it adds its
    /// decay points as one product (decay_spread::tail). Equal to db_to_power of db() to rounding
    /// (a relative error of tens of ulps). Returns the index of the first frame wholly in the decay.
    std::size_t powers(std::size_t first, double hop_s, std::span<const head> heads, std::span<double> out) const {
        const double decay_from_s = attack_s + hold_s;
        const std::size_t n = wp->x.size();
        std::size_t i = 0;
        for (; i < out.size(); ++i) {
            const double centre_s = static_cast<double>(first + i) * hop_s;
            const double start_s = centre_s - 0.5 * window_s;
            if (start_s >= decay_from_s) break;
            const head& h = heads[i];
            double weighted = h.weighted;
            if (h.first_decay < n) {
                const double t = start_s + wp->x[h.first_decay] * window_s;
                weighted += std::exp(-rate_per_s * (t - decay_from_s)) * fall->tail[h.first_decay];
            }
            out[i] = weighted > 0.0 ? weighted / wp->total : 0.0;
        }
        const std::size_t decay_first = i;
        if (i < out.size()) {
            const double centre_s = static_cast<double>(first + i) * hop_s;
            double p = fall->spread_power * std::exp(-rate_per_s * (centre_s - decay_from_s));
            for (; i < out.size(); ++i) {
                out[i] = p;
                p *= fall->hop_ratio;
            }
        }
        return decay_first;
    }
};

/// Each frame's head (framed_burst::head_of) for one attack and hold, frames [first, first + size).
using frame_heads = std::array<framed_burst::head, max_fit_frames + 2>;

/// Least squares of the frames [first, end) against the framed burst: the squared error in dB and
/// the level P that minimizes it (the mean difference).
struct burst_error {
    double sq_db2 = std::numeric_limits<double>::infinity();
    double peak_db = 0.0;
};

/// The power mean of v over [i - 1, i + 1] within [first, end), dB (dB in, dB out).
double smoothed_db(std::span<const double> v, std::size_t i, std::size_t first, std::size_t end) {
    double power = 0.0;
    int count = 0;
    for (std::size_t j = std::max(first, i > 0 ? i - 1 : 0); j < std::min(end, i + 2); ++j, ++count)
        power += db_to_power(v[j]);
    return power_to_db(power / count);
}

burst_error error_of(const burst_frames& f, std::span<const double> smoothed, const window_power& wp,
                     std::size_t end, double attack_s, double hold_s, const decay_spread& decay, const frame_heads& heads) {
    const framed_burst model(wp, f.window_s, attack_s, hold_s, decay);
    const std::size_t last = std::min(f.level_db.size(), end + 1);
    // Each frame's model power once (smoothed_db's terms: the same sums, a third of the powers).
    std::array<double, max_fit_frames + 2> model_power;  // the first count written by powers()
    const std::size_t count = last - f.first;
    const std::size_t decay_first = model.powers(f.first, f.hop_s, std::span(heads).first(count),
                                                 std::span(model_power).first(count));
    // Where all three of a mean's frames lie wholly in the decay, each mean is the one before it
    // times exp(-k hop): its dB the one before plus that ratio in dB (no logarithm per frame).
    const double step_db = -decay.rate_per_s * f.hop_s * (10.0 / std::numbers::ln10);
    double sum = 0.0, sum_sq = 0.0;
    double model_db = 0.0;
    bool on_line = false;  // model_db holds the previous frame's mean, all three in the decay
    const auto n = static_cast<double>(end - f.first);
    for (std::size_t i = f.first; i < end; ++i) {
        const std::size_t k = i - f.first;
        const std::size_t lo = k > 0 ? k - 1 : 0;
        const std::size_t hi = std::min(count, k + 2);
        const bool in_decay = hi - lo == 3 && lo >= decay_first;
        if (in_decay && on_line) {
            model_db += step_db;
        } else {
            double power = 0.0;
            for (std::size_t j = lo; j < hi; ++j) power += model_power[j];
            model_db = power_to_db(power / static_cast<double>(hi - lo));
        }
        on_line = in_decay;
        const double d = smoothed[k] - model_db;
        sum += d;
        sum_sq += d * d;
    }
    const double mean = sum / n;
    return {.sq_db2 = sum_sq - n * mean * mean, .peak_db = mean};
}

/// Best held fits refined by golden section besides the fit without a hold: the 8 best of the
/// grid's 16 holds (trades the other holds' refinement, 8 x 18 of a band's ~690 fits, for the
/// chance that a hold whose grid T60 fits worse refines best; measured: the 20 shared and demo
/// patches and the 40 held-out ones byte-identical to refining all 16; with the best 6 or 3
/// test_burst's exact burst of hold 3.5 ms, T60 0.2 s came back with a 3 ms hold).
constexpr int refined_holds = 8;

/// A fit with a given hold: its T60 (grid index j, -1 once refined off the grid) and error.
struct burst_candidate {
    double hold_s = 0.0;
    double t60_s = 0.0;
    int j = 0;
    burst_error e;
};

/// The T60 search for one set of frames: the log grid, then golden section between the best grid
/// point's neighbours.
struct t60_search {
    const burst_frames* frames = nullptr;
    std::span<const double> smoothed;  ///< the frames' levels [first, end), 3-frame power means
    const window_power* wp = nullptr;
    std::size_t end = 0;
    double attack_s = 0.0;
    const burst_fit_params* params = nullptr;

    [[nodiscard]] double grid_t60_s(int j) const {
        return params->min_t60_s * std::pow(params->max_t60_s / params->min_t60_s,
                                            static_cast<double>(j) / (t60_grid_points - 1));
    }
    /// The grid's decays, made once for every hold (fill_grid).
    std::array<decay_spread, t60_grid_points> grid{};
    void fill_grid() {
        for (int j = 0; j < t60_grid_points; ++j) grid[static_cast<std::size_t>(j)] = decay_spread(*wp, frames->window_s, frames->hop_s, grid_t60_s(j));
    }
    /// The frames' heads of the hold last asked for (a grid row and a refinement each ask one).
    mutable double heads_hold_s = -1.0;
    mutable frame_heads heads{};
    const frame_heads& heads_for(double hold_s) const {
        if (hold_s != heads_hold_s) {
            const decay_spread no_decay{};  // the heads read no decay
            const framed_burst model(*wp, frames->window_s, attack_s, hold_s, no_decay);
            const std::size_t last = std::min(frames->level_db.size(), end + 1);
            for (std::size_t j = frames->first; j < last; ++j)
                heads[j - frames->first] = model.head_of(static_cast<double>(j) * frames->hop_s);
            heads_hold_s = hold_s;
        }
        return heads;
    }
    [[nodiscard]] burst_error at(double hold_s, double t60_s) const {
        return error_of(*frames, smoothed, *wp, end, attack_s, hold_s, decay_spread(*wp, frames->window_s, frames->hop_s, t60_s),
                        heads_for(hold_s));
    }
    [[nodiscard]] burst_error at_grid(double hold_s, int j) const {
        return error_of(*frames, smoothed, *wp, end, attack_s, hold_s, grid[static_cast<std::size_t>(j)], heads_for(hold_s));
    }
    [[nodiscard]] burst_candidate on_grid(double hold_s) const {
        burst_candidate best{.hold_s = hold_s, .t60_s = grid_t60_s(0), .j = 0, .e = at_grid(hold_s, 0)};
        for (int j = 1; j < t60_grid_points; ++j) {
            const burst_error e = at_grid(hold_s, j);
            if (e.sq_db2 < best.e.sq_db2) best = {.hold_s = hold_s, .t60_s = grid_t60_s(j), .j = j, .e = e};
        }
        return best;
    }
    [[nodiscard]] burst_candidate refined(const burst_candidate& c) const {
        double lo = std::log(grid_t60_s(std::max(0, c.j - 1)));
        double hi = std::log(grid_t60_s(std::min(t60_grid_points - 1, c.j + 1)));
        const double g = 0.5 * (std::sqrt(5.0) - 1.0);
        double x1 = hi - g * (hi - lo), x2 = lo + g * (hi - lo);
        burst_error e1 = at(c.hold_s, std::exp(x1)), e2 = at(c.hold_s, std::exp(x2));
        for (int k = 0; k < golden_steps; ++k) {
            if (e1.sq_db2 < e2.sq_db2) {
                hi = x2, x2 = x1, e2 = e1, x1 = hi - g * (hi - lo), e1 = at(c.hold_s, std::exp(x1));
            } else {
                lo = x1, x1 = x2, e1 = e2, x2 = lo + g * (hi - lo), e2 = at(c.hold_s, std::exp(x2));
            }
        }
        burst_candidate out = c;
        const bool first = e1.sq_db2 < e2.sq_db2;
        if ((first ? e1 : e2).sq_db2 < c.e.sq_db2) {
            out.t60_s = std::exp(first ? x1 : x2);
            out.e = first ? e1 : e2;
        }
        return out;
    }
};

}  // namespace

double burst_framed_level_db(double attack_s, double hold_s, double t60_s, window_kind window, double window_s,
                             double centre_s) {
    assert(window_s > 0.0 && t60_s > 0.0 && attack_s >= 0.0 && hold_s >= 0.0);
    const window_power wp(window);
    return framed_burst(wp, window_s, attack_s, hold_s, decay_spread(wp, window_s, window_s, t60_s)).db(centre_s);
}

std::optional<burst_fit> fit_burst(const burst_frames& f, const burst_fit_params& params) {
    assert(f.window_s > 0.0 && f.hop_s > 0.0 && params.min_t60_s > 0.0 && params.max_t60_s > params.min_t60_s);
    const std::size_t n = std::min(f.level_db.size(), f.first + max_fit_frames);
    if (f.first + params.min_frames > n) return std::nullopt;
    auto floor_at = [&](std::size_t i) {
        return i < f.floor_db.size() ? static_cast<double>(f.floor_db[i]) : -infinity;
    };
    // One frame's level of a few bins scatters by many dB (a spill taken off can leave 30 dB
    // dips): the fit, its span and its loudest frame go by 3-frame power means, of the frames and
    // of the model alike.
    std::vector<double> raw(f.level_db.begin() + static_cast<std::ptrdiff_t>(f.first), f.level_db.begin() + static_cast<std::ptrdiff_t>(n));
    std::vector<double> smoothed(raw.size());
    for (std::size_t i = 0; i < raw.size(); ++i) smoothed[i] = smoothed_db(raw, i, 0, raw.size());
    // The burst of the attack peaks early: its loudest frame is sought among the first frames only
    // (a later maximum is another event, or what the partials' rise leaves).
    const auto searched = std::min(smoothed.size(), static_cast<std::size_t>(std::floor(params.max_peak_s / f.hop_s)) + 1);
    const auto loudest = f.first + static_cast<std::size_t>(
                                       std::max_element(smoothed.begin(), smoothed.begin() + static_cast<std::ptrdiff_t>(searched)) -
                                       smoothed.begin());
    const double peak_db = smoothed[loudest - f.first];
    if (peak_db < floor_at(loudest) + params.floor_margin_db) return std::nullopt;
    std::size_t end = loudest + 1;
    while (end < n && smoothed[end - f.first] >= std::max(peak_db - params.fall_db, floor_at(end) + params.floor_margin_db))
        ++end;
    if (end - f.first < params.min_frames) return std::nullopt;

    const window_power wp(f.window);
    const double attack_s = std::max(0.0, static_cast<double>(loudest) * f.hop_s - 0.5 * f.window_s);
    if (attack_s > params.max_attack_s + 1e-9) return std::nullopt;
    t60_search search{.frames = &f, .smoothed = smoothed, .wp = &wp, .end = end, .attack_s = attack_s, .params = &params};
    search.fill_grid();
    // Each hold's best T60 on the grid; the no-hold fit and the best held ones refined. A hold is
    // kept only where it pays for its parameter by the Bayesian information criterion (Schwarz
    // 1978), frames counted as independent at half a window apart (the Hann window's frames 1 ms
    // apart share most of their samples).
    std::vector<burst_candidate> held;
    const auto holds = static_cast<int>(std::floor(params.max_hold_s / params.hold_step_s + 1e-9));
    for (int k = 1; k <= holds; ++k) held.push_back(search.on_grid(k * params.hold_step_s));
    const auto refined_count = std::min<std::size_t>(held.size(), refined_holds);
    std::partial_sort(held.begin(), held.begin() + static_cast<std::ptrdiff_t>(refined_count), held.end(),
                      [](const burst_candidate& a, const burst_candidate& b) { return a.e.sq_db2 < b.e.sq_db2; });
    const burst_candidate no_hold = search.refined(search.on_grid(0.0));
    burst_candidate best_held = no_hold;
    for (std::size_t k = 0; k < refined_count; ++k) {
        const burst_candidate c = search.refined(held[k]);
        if (c.e.sq_db2 < best_held.e.sq_db2) best_held = c;
    }
    const double independent = std::max(2.0, static_cast<double>(end - f.first) * f.hop_s / (0.5 * f.window_s));
    const double tiny_db2 = 1e-12;  // an exact fit (synthetic frames) has no error to compare
    const bool keep_hold = best_held.hold_s > 0.0 &&
                           independent * std::log((best_held.e.sq_db2 + tiny_db2) / (no_hold.e.sq_db2 + tiny_db2)) +
                                   std::log(independent) < 0.0;
    const burst_candidate& best = keep_hold ? best_held : no_hold;
    // A burst that does not die within the attack is the floor band's; one that dies within the
    // first grid step is too fast to tell from the window's smear of the onset.
    if (best.j == t60_grid_points - 1 || best.j == 0) return std::nullopt;
    const double best_hold_s = best.hold_s;
    const double t60_s = best.t60_s;
    const burst_error& fitted = best.e;
    burst_fit out{.env = {.attack_s = attack_s, .peak = level_db{fitted.peak_db}, .decay = {}},
                  .fit_end_s = static_cast<double>(end - 1) * f.hop_s};
    if (best_hold_s > 0.0) out.env.decay.push_back({.t60_s = infinity, .until_s = attack_s + best_hold_s});
    out.env.decay.push_back({.t60_s = t60_s, .until_s = std::nullopt});
    return out;
}

}  // namespace wane

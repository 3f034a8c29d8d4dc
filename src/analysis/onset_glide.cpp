// Each strong partial's early pitch glide on the waveform (see onset_glide.hpp).
#include "analysis/onset_glide.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <complex>
#include <cstdint>
#include <memory>
#include <numbers>
#include <numeric>
#include <optional>
#include <span>
#include <utility>
#include <vector>

#include "analysis/glide_heard.hpp"
#include "analysis/glide_projection.hpp"
#include "core/envelope.hpp"
#include "core/glide.hpp"
#include "core/units.hpp"
#include "pitch/root.hpp"
#include "synthesis/render.hpp"

namespace wane {

namespace {

using namespace glide_projection;

/// Frames of the render the stage compares over, and a render long enough that its end fade
/// (synthesis/render.hpp) lies past them.
constexpr double render_margin_s = 2.0 * end_fade_s;

/// The partials of q alone (or of the whole patch when q is null) over the first `count` frames,
/// as the renderer plays them (note gain and band limit included).
std::vector<double> render_start(const patch& p, const partial* q, double rate_hz, std::size_t count) {
    // The partials wanted alone (no copy of the others, nor of the noise).
    patch one{.version = p.version, .note = p.note, .source = p.source, .partials = {}, .noise = {}};
    if (q) {
        one.partials = {*q};
    } else {
        one.partials = p.partials;
    }
    one.note.length_s = static_cast<double>(count) / rate_hz + render_margin_s;
    const partial_renderer r(one, {.sample_rate_hz = rate_hz, .include_noise = false});
    const auto y = std::make_unique_for_overwrite<float[]>(count);  // the render writes every frame
    r.render(0, {y.get(), count});
    return {y.get(), y.get() + count};
}

/// The coarse grid's glide terms on the merged blocks: the same for every partial of a note (the
/// blocks' centres depend on the span only), so made once. Ring r holds the offsets over
/// max_abs_cents 2^(r - 1) up to max_abs_cents 2^r (ring 0: all up to max_abs_cents). A point's
/// terms are made as a sum first reaches its blocks (most candidates the bound rejects early) and
/// kept for the next partial: the same numbers as made whole.
struct coarse_grid {
    std::vector<glide_terms> points;
    std::vector<std::vector<double>> decay;  ///< per time constant; the points' decay spans look into these
    std::vector<std::size_t> decay_of;       ///< per point: its time constant's index in decay
};
/// The decay of s's blocks for glide_s from met (tau, decay), made and added the first time
/// (decays). An entry's buffer moves with it, unchanged, when the list grows.
std::span<const double> decay_in(std::vector<std::pair<double, std::vector<double>>>& met, const block_sums& s,
                                 double glide_s) {
    for (const auto& [tau, decay] : met)
        if (tau == glide_s) return decay;
    met.emplace_back(glide_s, decays(s, glide_s));
    return met.back().second;
}

/// The grids' terms kept for the next partial of the note: the coarse rings, and the fine grid's
/// decays e^(-t_b / tau) on its blocks (the same blocks for every partial) per time constant met
/// (the fine grid's time constants follow the coarse best's, which partials share).
struct coarse_rings {
    std::vector<coarse_grid> grids;
    std::vector<std::pair<double, std::vector<double>>> fine_decays;  ///< (tau, decay) as met
    /// The same on the flat sums' blocks (the shaped sums have the same centres), for the best's
    /// sum on them (the fine grid's own when it is not on the merged blocks).
    std::vector<std::pair<double, std::vector<double>>> block_decays;
    /// Work space for search: a partial's decay tails per coarse time constant, and the fine
    /// grid's of one time constant (their buffers reused from partial to partial).
    std::vector<decay_tails> coarse_tails;
    decay_tails fine_tails;

    /// The fine blocks' decay for tau, made the first time (decays).
    std::span<const double> fine_decay(const block_sums& f_sums, double glide_s) { return decay_in(fine_decays, f_sums, glide_s); }
    /// The flat (and shaped) blocks' decay for tau, made the first time (decays).
    std::span<const double> block_decay(const block_sums& s, double glide_s) { return decay_in(block_decays, s, glide_s); }
};

/// evaluate(s, freq_hz, cents, glide_s, rate_hz) with the decay of s's blocks kept in rings
/// (block_decay; the same numbers as decays makes each time).
glide_fit evaluate_on_blocks(const block_sums& s, double freq_hz, double cents, double glide_s, double rate_hz,
                             coarse_rings& rings) {
    if (cents == 0.0) return evaluate(s, freq_hz, cents, glide_s, rate_hz);
    glide_terms t = terms_at(cents, glide_s, rings.block_decay(s, glide_s));
    return evaluate(s, freq_hz, t, rate_hz);
}

coarse_grid make_coarse_grid(const block_sums& coarse_sums, const onset_glide_params& params, std::size_t ring) {
    coarse_grid out;
    const double outer_cents = params.max_abs_cents * std::ldexp(1.0, static_cast<int>(ring));
    const double inner_cents = ring == 0 ? 0.0 : 0.5 * outer_cents;
    const auto steps = static_cast<int>(std::floor(outer_cents / params.cents_step));
    const double ratio = std::pow(params.max_fit_glide_s / params.min_fit_glide_s, 1.0 / (params.glide_s_steps - 1));
    // glide_s_steps up to max_fit_glide_s, then on at the same ratio for the short-lived partials.
    for (int j = 0;; ++j) {
        const double glide_s = params.min_fit_glide_s * std::pow(ratio, j);
        if (j >= params.glide_s_steps && glide_s > params.max_short_lived_glide_s) break;
        out.decay.push_back(decays(coarse_sums, glide_s));
        const std::span<const double> decay = out.decay.back();  // its buffer moves with out, unchanged
        for (int i = -steps; i <= steps; ++i) {
            const double cents = i * params.cents_step;
            if (std::abs(cents) > inner_cents && i != 0) {
                out.points.push_back({.cents = cents, .glide_s = glide_s,
                                      .whole_rad_per_hz = glide_remaining_phase_at_decay_rad(1.0, cents, glide_s, 1.0),
                                      .remaining_rad_per_hz = std::vector<double>(decay.size()),
                                      .excess = std::vector<double>(decay.size()), .decay = decay, .filled = 0});
                out.decay_of.push_back(out.decay.size() - 1);
            }
        }
    }
    return out;
}

/// The best (c0, tau): the coarse grid (time constants up to longest_s), then the fine one around
/// its best, unless the coarse best explains less than coarse_floor (then a fit under it, none
/// of which the caller keeps). The fine best where it explains kept_floor or more; under it a
/// fit under kept_floor (the caller keeps none of those either). Candidates a bound shows under
/// the floor that applies are not summed whole (evaluate_above).
glide_fit search(const block_sums& s, double freq_hz, double rate_hz, const onset_glide_params& params,
                 coarse_rings& rings, std::size_t ring, double longest_s, double coarse_floor, double kept_floor) {
    glide_fit best;
    const block_sums coarse_sums = merged_pairs(s, rate_hz);
    while (rings.grids.size() <= ring) rings.grids.push_back(make_coarse_grid(coarse_sums, params, rings.grids.size()));
    coarse_grid& grid = rings.grids[ring];
    // This partial's decay tails per time constant (evaluate_above's settled bound).
    std::vector<decay_tails>& tails = rings.coarse_tails;
    if (tails.size() < grid.decay.size()) tails.resize(grid.decay.size());
    for (std::size_t k = 0; k < grid.decay.size(); ++k) tails_into(coarse_sums, grid.decay[k], tails[k]);
    for (std::size_t i = 0; i < grid.points.size(); ++i) {  // terms made as the sums reach them (evaluate_above)
        glide_terms& t = grid.points[i];
        if (t.glide_s > longest_s) continue;
        const std::optional<glide_fit> f =
            evaluate_above(coarse_sums, freq_hz, t, rate_hz, std::max(best.explained, coarse_floor), &tails[grid.decay_of[i]]);
        if (f && f->explained > best.explained) best = *f;
    }
    const glide_fit coarse = best;
    if (coarse.explained < coarse_floor) return coarse;
    // The fine grid on the fine blocks, or on the merged ones (onset_glide_params::fine_on_merged_blocks,
    // under a floor a share lower: the two sums' values differ by the glide's second-order term)
    // with its best summed again on the fine blocks.
    const block_sums& f_sums = params.fine_on_merged_blocks ? coarse_sums : s;
    const double f_floor = params.fine_on_merged_blocks ? kept_floor * (1.0 - params.merged_floor_share) : kept_floor;
    // The coarse best summed on f_sums: the coarse fit itself where those are the merged blocks
    // (the same terms, summed whole in the same order).
    best = params.fine_on_merged_blocks && coarse.cents != 0.0 ? coarse : evaluate(f_sums, freq_hz, coarse.cents, coarse.glide_s, rate_hz);
    const auto fine = static_cast<int>(std::round(params.cents_step / params.fine_cents_step));
    const int half_octave = params.fine_glide_s_steps_per_octave / 2;
    glide_terms lazy{.remaining_rad_per_hz = std::vector<double>(f_sums.z.size()), .excess = std::vector<double>(f_sums.z.size())};
    // Each offset's excess bound, the same at every time constant: made once.
    std::vector<double> excess_bounds;
    for (int i = -fine; i <= fine; ++i) excess_bounds.push_back(excess_bound_at(coarse.cents + i * params.fine_cents_step));
    for (int j = -half_octave; j <= half_octave; ++j) {
        const double glide_s = std::clamp(coarse.glide_s * std::exp2(static_cast<double>(j) / params.fine_glide_s_steps_per_octave),
                                          params.min_fit_glide_s / 2.0, max_glide_s);
        // Its buffer moves with fine_decays' entry, unchanged, when the list grows.
        const std::span<const double> decay = rings.fine_decay(f_sums, glide_s);
        const decay_tails& settled = rings.fine_tails;
        tails_into(f_sums, decay, rings.fine_tails);
        std::size_t at = 0;  // i's index in excess_bounds
        for (int i = -fine; i <= fine; ++i, ++at) {
            const double cents = coarse.cents + i * params.fine_cents_step;
            if (cents == 0.0) continue;
            lazy.cents = cents;
            lazy.glide_s = glide_s;
            lazy.whole_rad_per_hz = glide_remaining_phase_at_decay_rad(1.0, cents, glide_s, 1.0);
            lazy.decay = decay;
            lazy.filled = 0;
            lazy.excess_bound = excess_bounds[at];
            const std::optional<glide_fit> f = evaluate_above(f_sums, freq_hz, lazy, rate_hz, std::max(best.explained, f_floor), &settled);
            if (f && f->explained > best.explained) best = *f;
        }
    }
    if (params.fine_on_merged_blocks) best = evaluate_on_blocks(s, freq_hz, best.cents, best.glide_s, rate_hz, rings);
    return best;
}

/// q's envelope is short_lived_drop_db under its start by short_lived_at_s (onset_glide.hpp).
bool is_short_lived(const partial& q, const onset_glide_params& params) {
    const double start_db = envelope_level(q.env, q.env.attack_s).db;
    return envelope_level(q.env, params.short_lived_at_s).db <= start_db - params.short_lived_drop_db;
}

/// Whether no glide the search can reach explains floor_explained on s: |S| <= sum_b |Z_b| + max_b
/// |g'_b| sum_b |Z1_b| (projection's bound before any block is summed), |g'_b| at most 2 pi f / fs
/// times the excess of the largest offset searched, expm1(c ln2 / 1200) (the outer ring's edge
/// plus the fine grid's reach; a flat offset's excess, |f(t) / f - 1|, is largest at t = 0 and for
/// a positive offset), padded like projection's. Then every candidate would be rejected and the
/// fit kept nowhere: the search is skipped (the same answer, none; mostly the short-lived
/// partials, whose least extra share their weak block sums cannot reach).
bool explains_under(const block_sums& s, double freq_hz, double rate_hz, const onset_glide_params& params, double floor_explained) {
    const double largest_cents = params.max_abs_cents * std::ldexp(1.0, static_cast<int>(params.offset_rings)) + params.cents_step;
    const double slope = two_pi * freq_hz / rate_hz * std::expm1(largest_cents * std::numbers::ln2 / 1200.0);
    const double bound = (s.tail_z[0] + slope * s.tail_z1[0]) * (1.0 + 1e-6);
    return 2.0 * bound * bound / s.amp_energy < floor_explained;
}

/// The glide of partial q on y (q's partial alone plus what the copy leaves), when it is kept
/// (onset_glide.hpp): the search with a = 1, C with a = q's envelope. min_extra: the energy the
/// glide must explain more than no glide (0: none asked); a coarse best short of half of it is
/// not refined (the fine grid moves a best by under a coarse step). z: work space, reused.
std::optional<glide_fit> fit_glide(std::span<const double> y, const partial& q, double gain_lin, double rate_hz,
                                   std::size_t block, const onset_glide_params& params, coarse_rings& rings,
                                   double min_extra, heterodyned& z) {
    heterodyne_into(y, q.freq_hz, rate_hz, z);
    const block_sums flat = sum_flat(z, rate_hz, block);
    if (!(flat.amp_energy > 0.0)) return std::nullopt;
    const glide_fit none = evaluate(flat, q.freq_hz, 0.0, 0.0, rate_hz);
    const bool short_lived = is_short_lived(q, params);
    // The longest time constant on the grid for q (1e-9: the grid's own rounding).
    const double longest_s = short_lived ? params.max_short_lived_glide_s : params.max_fit_glide_s * (1.0 + 1e-9);
    const double share = std::pow(10.0, params.min_gain_db / 10.0) - 1.0;
    // The least E the checks below keep, solved for E (extra >= min_extra, and extra >= share times
    // none.explained or times band_energy - E), less 1e-9 of it against rounding: a fine best
    // under it is dropped, whichever it is.
    const double n0 = none.explained;
    const double kept_floor = std::max(n0 + min_extra, std::min(n0 + share * n0, (n0 + share * flat.band_energy) / (1.0 + share))) *
                              (1.0 - 1e-9);
    if (explains_under(flat, q.freq_hz, rate_hz, params, kept_floor)) return std::nullopt;
    // A coarse best short of refine_share of the way from no glide to kept_floor, or of half of
    // min_extra, is not refined (the fine grid moves a best by under a coarse step).
    const double coarse_floor = n0 + std::max(0.5 * min_extra, params.refine_share * (kept_floor - n0));
    glide_fit best = search(flat, q.freq_hz, rate_hz, params, rings, 0, longest_s, coarse_floor, kept_floor);
    // A best on the offset's outer edge: the grid goes on by rings of twice the range, up to
    // offset_rings of them, while the best lies on the edge (onset_glide.hpp).
    double range_cents = params.max_abs_cents;
    for (std::size_t ring = 1; ring <= params.offset_rings && std::abs(best.cents) >= range_cents; ++ring) {
        const glide_fit wider = search(flat, q.freq_hz, rate_hz, params, rings, ring, longest_s, coarse_floor, kept_floor);
        if (wider.explained > best.explained) best = wider;
        range_cents *= 2.0;
    }
    // A best still on the offset's edge is a partial off its frequency over the whole span, not a
    // glide that settles onto it. (A best at the longest time constant is kept: the settled
    // frequency then moves so that the copy is heard where the partial is, fit_heard_glide.)
    const bool at_edge = std::abs(best.cents) >= range_cents;
    // What the glide explains more, against the smaller of what the partial explains without it
    // and what stays unexplained near f.
    const double unexplained = flat.band_energy - best.explained;
    const double extra = best.explained - none.explained;
    if (!(unexplained > 0.0 && extra > 0.0) || at_edge || std::abs(best.cents) < params.min_cents ||
        extra < share * std::min(none.explained, unexplained) || extra < min_extra) {
        return std::nullopt;
    }
    const block_sums shaped = sum_shaped(z, q, gain_lin, rate_hz, block);
    if (!(shaped.amp_energy > 0.0)) return std::nullopt;
    best.amp = evaluate_on_blocks(shaped, q.freq_hz, best.cents, best.glide_s, rate_hz, rings).amp;
    return best;
}

}  // namespace

void scale_envelope_start(envelope& env, double scale, double max_db) {
    const double change_db = std::clamp(to_level(amp_lin{scale}).db, -max_db, max_db);
    if (env.decay.size() >= 2 && env.decay[0].until_s) {
        const double until_s = *env.decay[0].until_s;
        const double end_db = envelope_level(env, until_s).db;
        const double new_peak_db = env.peak.db + change_db;
        const double drop_db = new_peak_db - end_db;  // over until_s - attack_s
        if (drop_db == 0.0) {
            env.decay[0].t60_s = infinity;
        } else {
            env.decay[0].t60_s = 60.0 * (until_s - env.attack_s) / drop_db;
        }
        env.peak = level_db{new_peak_db};
        return;
    }
    env.peak = level_db{env.peak.db + change_db};
}

namespace {

/// q with the glide `fit`: its offset and time constant, the phase arg(C) and the start level
/// scaled by |C| (scale_start).
partial with_glide(const partial& q, const glide_fit& fit, const onset_glide_params& params) {
    partial g = q;
    g.glide_cents = fit.cents;
    g.glide_s = fit.glide_s;
    g.phase_rad = std::arg(fit.amp);
    scale_envelope_start(g.env, std::abs(fit.amp), params.max_level_change_db);
    return g;
}

/// The fit's inputs that stay the same for every pass over one partial (fit_glide's).
struct glide_target {
    std::span<const double> y;
    double gain_lin = 1.0;
    double rate_hz = 0.0;
    std::size_t block = 1;
    double min_extra = 0.0;
    double heard_end_s = 0.0;  ///< the heard span's end, within the note
};

/// q's glide (fit_glide), with its settled frequency moved so that the copy is heard where q is
/// (onset_glide.hpp, heard_passes): q as it is for a short-lived partial, whose long-term
/// frequency was measured after it died. None where a pass keeps no glide or the passes end
/// with the copy's peak still off.
std::optional<partial> fit_heard_glide(const glide_target& t, const partial& q, const onset_glide_params& params,
                                       coarse_rings& rings, heterodyned& z) {
    std::optional<glide_fit> fit = fit_glide(t.y, q, t.gain_lin, t.rate_hz, t.block, params, rings, t.min_extra, z);
    if (!fit) return std::nullopt;
    partial g = with_glide(q, *fit, params);
    if (is_short_lived(q, params) || !(t.heard_end_s > heard_span_start_s)) return g;
    partial settled = q;  // no glide, its frequency moved
    const double tolerance_hz = q.freq_hz * std::expm1(std::numbers::ln2 / 1200.0 * params.heard_tolerance_cents);
    for (int pass = 0;; ++pass) {
        const double miss_hz = g.freq_hz + glide_heard_offset_hz(g, heard_span_start_s, t.heard_end_s, {}) - q.freq_hz;
        if (std::abs(miss_hz) <= tolerance_hz) return g;
        if (pass == params.heard_passes) {
            // The refits move the glide by grid steps: the last one keeps its glide and only
            // its settled frequency moves (the miss follows it one for one).
            g.freq_hz -= miss_hz;
            const double left_hz = g.freq_hz + glide_heard_offset_hz(g, heard_span_start_s, t.heard_end_s, {}) - q.freq_hz;
            if (std::abs(left_hz) <= tolerance_hz) return g;
            return std::nullopt;
        }
        settled.freq_hz -= miss_hz;
        fit = fit_glide(t.y, settled, t.gain_lin, t.rate_hz, t.block, params, rings, t.min_extra, z);
        if (!fit) return std::nullopt;
        g = with_glide(settled, *fit, params);
    }
}

double residual_energy(std::span<const float> x, std::span<const double> copy) {
    double e = 0.0;
    for (std::size_t n = 0; n < copy.size(); ++n) {
        const double d = static_cast<double>(x[n]) - copy[n];
        e += d * d;
    }
    return e;
}

/// Whether swapping own for gliding in copy raises the residual x - copy over its first `early`
/// samples by more than the share max_rise (onset_glide.hpp, early_s).
bool raises_early_residual(std::span<const float> x, std::span<const double> copy, std::span<const double> own,
                           std::span<const double> gliding, std::size_t early, double max_rise) {
    double before = 0.0;
    double after = 0.0;
    for (std::size_t n = 0; n < early; ++n) {
        const double d = static_cast<double>(x[n]) - copy[n];
        const double e = d + own[n] - gliding[n];
        before += d * d;
        after += e * e;
    }
    return after > (1.0 + max_rise) * before;
}

}  // namespace

onset_glide_summary fit_onset_glides(patch& p, std::span<const float> note, double sample_rate_hz,
                                     const onset_glide_params& params) {
    assert(sample_rate_hz > 0.0 && params.glide_s_steps >= 2);
    onset_glide_summary summary;
    const auto count = std::min(note.size(), static_cast<std::size_t>(std::llround(params.span_s * sample_rate_hz)));
    const auto block = std::max<std::size_t>(1, static_cast<std::size_t>(std::llround(params.block_s * sample_rate_hz)));
    if (p.partials.empty() || count < 8 * block) return summary;
    const double gain_lin = to_amp(level_db{p.note.gain_db}).lin;

    // The strong partials, strongest start first.
    std::vector<std::size_t> order(p.partials.size());
    std::iota(order.begin(), order.end(), std::size_t{0});
    const auto start_db = [&](std::size_t i) { return envelope_level(p.partials[i].env, p.partials[i].env.attack_s).db; };
    std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) { return start_db(a) > start_db(b); });
    const double strongest_db = start_db(order.front());

    std::vector<double> copy = render_start(p, nullptr, sample_rate_hz, count);
    double signal = 0.0;
    for (std::size_t n = 0; n < count; ++n) signal += static_cast<double>(note[n]) * static_cast<double>(note[n]);
    if (!(signal > 0.0)) return summary;
    const double before = residual_energy(note, copy);
    const patch original = p;

    const auto early = std::min(count, static_cast<std::size_t>(std::llround(params.early_s * sample_rate_hz)));
    std::size_t tried = 0;
    std::size_t tried_short_lived = 0;  // past the max_partials strongest
    coarse_rings rings;                 // made as the first partial needs them
    std::vector<double> y(count);       // each partial's target, the buffers reused
    heterodyned z;
    for (const std::size_t k : order) {
        if (start_db(k) < strongest_db - params.range_db ||
            (tried == params.max_partials && tried_short_lived == params.max_short_lived_partials)) {
            break;
        }
        partial& q = p.partials[k];
        if (q.glide_cents != 0.0 || q.freq_hz < params.min_freq_hz || q.freq_hz >= 0.5 * sample_rate_hz) continue;
        if (params.lasting_only && is_short_lived(q, params)) continue;
        const bool past_strongest = tried == params.max_partials;
        if (!past_strongest) {
            ++tried;
        } else if (is_short_lived(q, params)) {
            ++tried_short_lived;
        } else {
            continue;
        }
        const std::vector<double> own = render_start(p, &q, sample_rate_hz, count);
        for (std::size_t n = 0; n < count; ++n) y[n] = static_cast<double>(note[n]) - copy[n] + own[n];
        const glide_target target{.y = y, .gain_lin = gain_lin, .rate_hz = sample_rate_hz, .block = block,
                                  .min_extra = past_strongest ? params.min_short_lived_extra * signal : 0.0,
                                  .heard_end_s = std::min(heard_span_end_s, p.note.length_s)};
        const std::optional<partial> fit = fit_heard_glide(target, q, params, rings, z);
        if (!fit) continue;
        const partial p_before_glide = q;
        q = *fit;
        const std::vector<double> gliding = render_start(p, &q, sample_rate_hz, count);
        const bool early_checked = past_strongest || tried > params.early_checked_after;
        if (early_checked && raises_early_residual(note, copy, own, gliding, early, params.max_early_rise)) {
            q = p_before_glide;
            continue;
        }
        for (std::size_t n = 0; n < count; ++n) copy[n] += gliding[n] - own[n];
        ++summary.glides;
    }
    const double after = residual_energy(note, copy);
    summary.residual_before_db = to_level(amp_lin{std::sqrt(before / signal)}).db;
    summary.residual_after_db = to_level(amp_lin{std::sqrt(after / signal)}).db;
    if (summary.glides > 0 && !(after < before)) {
        p = original;
        summary.glides = 0;
        summary.residual_after_db = summary.residual_before_db;
    }
    return summary;
}

}  // namespace wane

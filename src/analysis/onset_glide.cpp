// Each strong partial's early pitch glide on the waveform (see onset_glide.hpp).
#include "analysis/onset_glide.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <complex>
#include <cstdint>
#include <numeric>
#include <optional>
#include <vector>

#include "core/envelope.hpp"
#include "core/glide.hpp"
#include "core/sincos_poly.hpp"
#include "core/units.hpp"
#include "synthesis/kernel_clones.hpp"
#include "synthesis/render.hpp"

namespace wane {

namespace {

using cplx = std::complex<double>;

/// Frames of the render the stage compares over, and a render long enough that its end fade
/// (synthesis/render.hpp) lies past them.
constexpr double render_margin_s = 2.0 * end_fade_s;

/// The partials of q alone (or of the whole patch when q is null) over the first `count` frames,
/// as the renderer plays them (note gain and band limit included).
std::vector<double> render_start(const patch& p, const partial* q, double rate_hz, std::size_t count) {
    patch one = p;
    one.noise.clear();
    if (q) one.partials = {*q};
    one.note.length_s = static_cast<double>(count) / rate_hz + render_margin_s;
    const partial_renderer r(one, {.sample_rate_hz = rate_hz, .include_noise = false});
    std::vector<float> y(count);
    r.render(0, y);
    return {y.begin(), y.end()};
}

/// The block sums of z[n] = y[n] a[n] e^(-j 2 pi f n / fs) and of (n - centre) z[n].
struct block_sums {
    std::vector<cplx> z;
    std::vector<cplx> z1;
    std::vector<double> centre_s;
    double amp_energy = 0.0;  ///< D = sum a^2
    /// sum_b 2 |Z_b|^2 / block: with a = 1, the energy y holds within about a block's inverse of f
    /// (each block's sum is a boxcar filter at f, first null 1 / block_s away).
    double band_energy = 0.0;
    /// tail_z[b] = sum_{b' >= b} |Z_b'|, tail_z1 the same of |Z1_b'| (count + 1 each): the
    /// bound by which projection rejects a candidate early.
    std::vector<double> tail_z;
    std::vector<double> tail_z1;
};

/// s's tail sums (block_sums::tail_z, tail_z1).
void add_tails(block_sums& s) {
    const std::size_t count = s.z.size();
    s.tail_z.assign(count + 1, 0.0);
    s.tail_z1.assign(count + 1, 0.0);
    for (std::size_t b = count; b-- > 0;) {
        s.tail_z[b] = s.tail_z[b + 1] + std::abs(s.z[b]);
        s.tail_z1[b] = s.tail_z1[b + 1] + std::abs(s.z1[b]);
    }
}

/// y[n] e^(-j 2 pi f n / fs) for n < count, its real and imaginary parts (the phasor from the
/// fraction of n f / fs cycles), one vector loop compiled for AVX2 and for the baseline
/// (synthesis/kernel_clones.hpp: the same bits).
WANE_KERNEL_CLONES
void heterodyne(const double* __restrict y, std::size_t count, double cycles_per_frame, double* __restrict re,
                double* __restrict im) {
    assert(count < (std::size_t{1} << 31U) && cycles_per_frame >= 0.0 && cycles_per_frame <= 0.5);
    const auto frames = static_cast<std::int32_t>(count);
    for (std::int32_t n = 0; n < frames; ++n) {  // a 32-bit count: its conversion to double vectorizes
        double cycles = static_cast<double>(n) * cycles_per_frame;
        cycles -= static_cast<double>(static_cast<std::int32_t>(cycles));  // its floor: cycles >= 0
        double sin_p = 0.0, cos_p = 0.0;
        sincos_poly(-two_pi * cycles, sin_p, cos_p);
        re[n] = y[n] * cos_p;
        im[n] = y[n] * sin_p;
    }
}

/// z[n] = y[n] e^(-j 2 pi f n / fs) (heterodyne), kept per sample for the flat and the shaped sums.
struct heterodyned {
    std::vector<double> re;
    std::vector<double> im;
};

heterodyned heterodyne(std::span<const double> y, double freq_hz, double rate_hz) {
    heterodyned z{.re = std::vector<double>(y.size()), .im = std::vector<double>(y.size())};
    heterodyne(y.data(), y.size(), freq_hz / rate_hz, z.re.data(), z.im.data());
    return z;
}

/// The block sums with a = 1 (flat), from z.
block_sums sum_flat(const heterodyned& z, double rate_hz, std::size_t block) {
    block_sums flat;
    for (std::size_t b0 = 0; b0 + block <= z.re.size(); b0 += block) {
        const double centre = static_cast<double>(b0) + 0.5 * static_cast<double>(block - 1);
        cplx zf{}, z1f{};
        for (std::size_t n = b0; n < b0 + block; ++n) {
            const cplx zn(z.re[n], z.im[n]);
            const double offset = static_cast<double>(n) - centre;
            zf += zn;
            z1f += offset * zn;
            flat.amp_energy += 1.0;
        }
        flat.band_energy += 2.0 * std::norm(zf) / static_cast<double>(block);
        flat.z.push_back(zf);
        flat.z1.push_back(z1f);
        flat.centre_s.push_back(centre / rate_hz);
    }
    add_tails(flat);
    return flat;
}

/// The block sums with a = q's envelope amplitude times gain_lin (shaped), from z: made only for
/// a glide that is kept (its C).
block_sums sum_shaped(const heterodyned& z, const partial& q, double gain_lin, double rate_hz, std::size_t block) {
    block_sums shaped;
    // The envelope's amplitude (core/envelope.hpp's definition), its pieces made once.
    const std::vector<envelope_piece> pieces = envelope_pieces(q.env);
    const double peak_lin = to_amp(q.env.peak).lin;
    std::size_t piece = 0;
    // The decay's amplitude: exact at a block's first sample and where a piece starts, then the
    // sample before times the piece's ratio per sample, 10^(slope / fs / 20) (a relative error of
    // a few ulps over a block, against one power per sample).
    double decay_amp = -1.0;  // the previous sample's (none: -1)
    double step_ratio = 1.0;
    const auto amp_at = [&](double t) {
        if (t < q.env.attack_s) {
            decay_amp = -1.0;
            return peak_lin * t / q.env.attack_s;
        }
        const std::size_t was = piece;
        while (piece + 1 < pieces.size() && t >= pieces[piece].end_s) ++piece;
        const envelope_piece& e = pieces[piece];
        if (decay_amp < 0.0 || piece != was) {
            decay_amp = to_amp(level_db{e.start_level.db + e.slope_db_per_s * (t - e.start_s)}).lin;
            step_ratio = to_amp(level_db{e.slope_db_per_s / rate_hz}).lin;
        } else {
            decay_amp *= step_ratio;
        }
        return decay_amp;
    };
    for (std::size_t b0 = 0; b0 + block <= z.re.size(); b0 += block) {
        const double centre = static_cast<double>(b0) + 0.5 * static_cast<double>(block - 1);
        cplx zs{}, z1s{};
        decay_amp = -1.0;  // exact again at each block's start
        for (std::size_t n = b0; n < b0 + block; ++n) {
            const double t = static_cast<double>(n) / rate_hz;
            const double a = gain_lin * amp_at(t);
            const cplx zn(z.re[n], z.im[n]);
            const double offset = static_cast<double>(n) - centre;
            zs += a * zn;
            z1s += offset * a * zn;
            shaped.amp_energy += a * a;
        }
        shaped.band_energy += 2.0 * std::norm(zs) / static_cast<double>(block);
        shaped.z.push_back(zs);
        shaped.z1.push_back(z1s);
        shaped.centre_s.push_back(centre / rate_hz);
    }
    return shaped;
}

/// The block sums of blocks twice as long (pairs merged, Z1 moved to the pair's centre): the
/// coarse search's, where the glide's second-order term may be 4 times the fine blocks'.
block_sums merged_pairs(const block_sums& s, double rate_hz) {
    block_sums out;
    out.amp_energy = s.amp_energy;
    out.band_energy = s.band_energy;
    for (std::size_t b = 0; b + 1 < s.z.size(); b += 2) {
        const double centre_s = 0.5 * (s.centre_s[b] + s.centre_s[b + 1]);
        const double half_frames = 0.5 * (s.centre_s[b + 1] - s.centre_s[b]) * rate_hz;
        out.z.push_back(s.z[b] + s.z[b + 1]);
        out.z1.push_back(s.z1[b] - half_frames * s.z[b] + s.z1[b + 1] + half_frames * s.z[b + 1]);
        out.centre_s.push_back(centre_s);
    }
    add_tails(out);
    return out;
}

/// The glide's terms at the blocks' centres for one (c0, tau), per hertz of f where they scale
/// with it: R(t_b) / f and G / f (core/glide.hpp's R at decay e^(-t_b / tau), linear in f) and the
/// frequency excess f(t_b) / f - 1. decay[b] = e^(-t_b / tau).
struct glide_terms {
    double cents = 0.0;
    double glide_s = 0.0;
    double whole_rad_per_hz = 0.0;
    std::vector<double> remaining_rad_per_hz;
    std::vector<double> excess;
    /// Terms made lazily (the fine grid's, most of whose candidates the bound rejects early):
    /// the first `filled` blocks' are made, the rest come from decay as projection reaches them.
    std::span<const double> decay{};
    std::size_t filled = 0;
};

/// t's terms for the blocks before upto (made from t.decay where not made yet; the same numbers
/// as made all at once).
void fill_terms(glide_terms& t, std::size_t upto) {
    if (t.filled >= upto) return;
    const std::size_t n = upto - t.filled;
    glide_terms_at_decays(t.cents, t.glide_s, t.decay.subspan(t.filled, n),
                          std::span<double>(t.remaining_rad_per_hz).subspan(t.filled, n),
                          std::span<double>(t.excess).subspan(t.filled, n));
    t.filled = upto;
}

glide_terms terms_at(double cents, double glide_s, std::span<const double> decay) {
    glide_terms out{.cents = cents, .glide_s = glide_s,
                    .whole_rad_per_hz = glide_remaining_phase_at_decay_rad(1.0, cents, glide_s, 1.0),
                    .remaining_rad_per_hz = std::vector<double>(decay.size()), .excess = std::vector<double>(decay.size())};
    glide_terms_at_decays(cents, glide_s, decay, out.remaining_rad_per_hz, out.excess);
    out.filled = decay.size();
    return out;
}

/// sin_g[b], cos_g[b] of freq_hz (whole_rad_per_hz - remaining_rad_per_hz[b]) for b < count: the
/// glide's phase at each block, one vector loop (no reduction), compiled for AVX2 and for the
/// baseline (synthesis/kernel_clones.hpp: no FMA, element-wise IEEE operations, the same bits).
WANE_KERNEL_CLONES
void glide_phases(double freq_hz, double whole_rad_per_hz, const double* __restrict remaining_rad_per_hz,
                  std::size_t count, double* __restrict sin_g, double* __restrict cos_g) {
    for (std::size_t b = 0; b < count; ++b)
        sincos_poly(freq_hz * (whole_rad_per_hz - remaining_rad_per_hz[b]), sin_g[b], cos_g[b]);
}

/// Blocks summed between two looks at projection's bound.
constexpr std::size_t bound_chunk_blocks = 8;
/// The bound's padding, relative: far above the rounding of the sums it bounds (a few ulps per
/// block), so a candidate it rejects would have come out under the floor had it been summed.
constexpr double bound_margin = 1e-9;

/// S(c0, tau) from the block sums (onset_glide.hpp): sum_b e^(-j g_b) (Z_b - j g'_b Z1_b) with
/// g_b = f (G - R(t_b)) / f and g'_b = 2 pi f / fs times the excess (per frame); none once it is
/// clear that |S|^2 < floor_norm. The blocks are summed in order, bound_chunk_blocks at a time;
/// after each stretch |S| <= |sum so far| + sum over the blocks left of (|Z_b| + |g'_b| |Z1_b|),
/// |g'_b| there at most its value at the first block left (the excess shrinks with the decay):
/// the tail sums once per partial (block_sums::tail_z) bound every candidate's rest.
std::optional<cplx> projection(const block_sums& s, double freq_hz, glide_terms& t, double rate_hz,
                               double floor_norm, std::vector<double>& scratch) {
    if (t.cents == 0.0) return std::accumulate(s.z.begin(), s.z.end(), cplx{});
    const std::size_t count = s.z.size();
    assert(t.excess.size() == count && (!(floor_norm > 0.0) || s.tail_z.size() == count + 1));
    scratch.resize(2 * count);
    double* sin_g = scratch.data();
    double* cos_g = scratch.data() + count;
    const double rad_per_frame = two_pi * freq_hz / rate_hz;
    double re = 0.0, im = 0.0;
    for (std::size_t b0 = 0; b0 < count; b0 += bound_chunk_blocks) {
        const std::size_t b1 = std::min(count, b0 + bound_chunk_blocks);
        fill_terms(t, std::min(count, b1 + 1));  // b1's excess for the bound
        glide_phases(freq_hz, t.whole_rad_per_hz, t.remaining_rad_per_hz.data() + b0, b1 - b0, sin_g + b0, cos_g + b0);
        for (std::size_t b = b0; b < b1; ++b) {
            const double slope = rad_per_frame * t.excess[b];  // g' per frame
            // a = Z - j slope Z1; (cos g - j sin g) a.
            const double a_re = s.z[b].real() + slope * s.z1[b].imag();
            const double a_im = s.z[b].imag() - slope * s.z1[b].real();
            re += cos_g[b] * a_re + sin_g[b] * a_im;
            im += cos_g[b] * a_im - sin_g[b] * a_re;
        }
        if (b1 == count || !(floor_norm > 0.0)) continue;
        const double bound = std::sqrt(re * re + im * im) + s.tail_z[b1] + std::abs(rad_per_frame * t.excess[b1]) * s.tail_z1[b1];
        const double padded = bound * (1.0 + bound_margin);
        if (padded * padded < floor_norm) return std::nullopt;
    }
    return cplx{re, im};
}

struct glide_fit {
    double cents = 0.0;
    double glide_s = 0.0;
    double explained = 0.0;  ///< E = 2 |S|^2 / D
    cplx amp{};              ///< C = 2 S / D
};

/// e^(-t_b / tau) at the blocks' centres.
std::vector<double> decays(const block_sums& s, double glide_s) {
    std::vector<double> out(s.centre_s.size());
    for (std::size_t b = 0; b < out.size(); ++b) out[b] = std::exp(-s.centre_s[b] / glide_s);
    return out;
}

/// The fit at t, or none when it explains less than floor_explained (a bound shows it before the
/// whole sum: projection).
std::optional<glide_fit> evaluate_above(const block_sums& s, double freq_hz, glide_terms& t, double rate_hz,
                                        double floor_explained) {
    thread_local std::vector<double> scratch;  // the blocks' sin and cos, kept between calls
    const std::optional<cplx> sum = projection(s, freq_hz, t, rate_hz, 0.5 * floor_explained * s.amp_energy, scratch);
    if (!sum) return std::nullopt;
    return glide_fit{.cents = t.cents, .glide_s = t.glide_s, .explained = 2.0 * std::norm(*sum) / s.amp_energy,
                     .amp = 2.0 * *sum / s.amp_energy};
}

glide_fit evaluate(const block_sums& s, double freq_hz, glide_terms& t, double rate_hz) {
    return *evaluate_above(s, freq_hz, t, rate_hz, -infinity);
}

glide_fit evaluate(const block_sums& s, double freq_hz, double cents, double glide_s, double rate_hz) {
    glide_terms t = cents == 0.0 ? glide_terms{} : terms_at(cents, glide_s, decays(s, glide_s));
    return evaluate(s, freq_hz, t, rate_hz);
}

/// The coarse grid's glide terms on the merged blocks: the same for every partial of a note (the
/// blocks' centres depend on the span only), so made once.
struct coarse_grid {
    std::vector<glide_terms> points;
};

coarse_grid make_coarse_grid(const block_sums& coarse_sums, const onset_glide_params& params) {
    coarse_grid out;
    const auto steps = static_cast<int>(std::floor(params.max_abs_cents / params.cents_step));
    const double ratio = std::pow(params.max_fit_glide_s / params.min_fit_glide_s, 1.0 / (params.glide_s_steps - 1));
    // glide_s_steps up to max_fit_glide_s, then on at the same ratio for the short-lived partials.
    for (int j = 0;; ++j) {
        const double glide_s = params.min_fit_glide_s * std::pow(ratio, j);
        if (j >= params.glide_s_steps && glide_s > params.max_short_lived_glide_s) break;
        const std::vector<double> decay = decays(coarse_sums, glide_s);
        for (int i = -steps; i <= steps; ++i)
            if (i != 0) out.points.push_back(terms_at(i * params.cents_step, glide_s, decay));
    }
    return out;
}

/// The best (c0, tau): the coarse grid (time constants up to longest_s), then the fine one around
/// its best, unless the coarse best explains less than coarse_floor (then a fit under it, none
/// of which the caller keeps). The fine best where it explains kept_floor or more; under it a
/// fit under kept_floor (the caller keeps none of those either). Candidates a bound shows under
/// the floor that applies are not summed whole (evaluate_above).
glide_fit search(const block_sums& s, double freq_hz, double rate_hz, const onset_glide_params& params,
                 std::optional<coarse_grid>& grid, double longest_s, double coarse_floor, double kept_floor) {
    glide_fit best;
    const block_sums coarse_sums = merged_pairs(s, rate_hz);
    if (!grid) grid = make_coarse_grid(coarse_sums, params);
    for (glide_terms& t : grid->points) {  // made whole: projection makes none
        if (t.glide_s > longest_s) continue;
        const std::optional<glide_fit> f = evaluate_above(coarse_sums, freq_hz, t, rate_hz, std::max(best.explained, coarse_floor));
        if (f && f->explained > best.explained) best = *f;
    }
    const glide_fit coarse = best;
    if (coarse.explained < coarse_floor) return coarse;
    best = evaluate(s, freq_hz, coarse.cents, coarse.glide_s, rate_hz);  // on the fine blocks
    const auto fine = static_cast<int>(std::round(params.cents_step / params.fine_cents_step));
    const int half_octave = params.fine_glide_s_steps_per_octave / 2;
    glide_terms lazy{.remaining_rad_per_hz = std::vector<double>(s.z.size()), .excess = std::vector<double>(s.z.size())};
    for (int j = -half_octave; j <= half_octave; ++j) {
        const double glide_s = std::clamp(coarse.glide_s * std::exp2(static_cast<double>(j) / params.fine_glide_s_steps_per_octave),
                                          params.min_fit_glide_s / 2.0, max_glide_s);
        const std::vector<double> decay = decays(s, glide_s);
        for (int i = -fine; i <= fine; ++i) {
            const double cents = coarse.cents + i * params.fine_cents_step;
            if (cents == 0.0) continue;
            lazy.cents = cents;
            lazy.glide_s = glide_s;
            lazy.whole_rad_per_hz = glide_remaining_phase_at_decay_rad(1.0, cents, glide_s, 1.0);
            lazy.decay = decay;
            lazy.filled = 0;
            const std::optional<glide_fit> f = evaluate_above(s, freq_hz, lazy, rate_hz, std::max(best.explained, kept_floor));
            if (f && f->explained > best.explained) best = *f;
        }
    }
    return best;
}

/// q's envelope is short_lived_drop_db under its start by short_lived_at_s (onset_glide.hpp).
bool is_short_lived(const partial& q, const onset_glide_params& params) {
    const double start_db = envelope_level(q.env, q.env.attack_s).db;
    return envelope_level(q.env, params.short_lived_at_s).db <= start_db - params.short_lived_drop_db;
}

/// The glide of partial q on y (q's partial alone plus what the copy leaves), when it is kept
/// (onset_glide.hpp): the search with a = 1, C with a = q's envelope. min_extra: the energy the
/// glide must explain more than no glide (0: none asked); a coarse best short of half of it is
/// not refined (the fine grid moves a best by under a coarse step).
std::optional<glide_fit> fit_glide(std::span<const double> y, const partial& q, double gain_lin, double rate_hz,
                                   std::size_t block, const onset_glide_params& params, std::optional<coarse_grid>& grid,
                                   double min_extra) {
    const heterodyned z = heterodyne(y, q.freq_hz, rate_hz);
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
    glide_fit best = search(flat, q.freq_hz, rate_hz, params, grid, longest_s, n0 + 0.5 * min_extra, kept_floor);
    // A best at the grid's edge (the largest offset or the longest time constant) is a partial
    // off its frequency over the whole span, not a glide that settles onto it.
    const double edge_s = short_lived ? longest_s : params.max_fit_glide_s;
    const bool at_edge = std::abs(best.cents) >= params.max_abs_cents || best.glide_s >= edge_s;
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
    best.amp = evaluate(shaped, q.freq_hz, best.cents, best.glide_s, rate_hz).amp;
    return best;
}

/// The partial's start level times `scale` (clamped to +-max_db): the peak moves, and a first
/// decay segment with an end keeps its level there (its T60 follows), so the later envelope stays.
void scale_start(envelope& env, double scale, double max_db) {
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
    std::optional<coarse_grid> grid;    // made at the first partial tried
    for (const std::size_t k : order) {
        if (start_db(k) < strongest_db - params.range_db || tried_short_lived == params.max_short_lived_partials) break;
        partial& q = p.partials[k];
        if (q.glide_cents != 0.0 || q.freq_hz < params.min_freq_hz || q.freq_hz >= 0.5 * sample_rate_hz) continue;
        const bool past_strongest = tried == params.max_partials;
        if (!past_strongest) {
            ++tried;
        } else if (is_short_lived(q, params)) {
            ++tried_short_lived;
        } else {
            continue;
        }
        const std::vector<double> own = render_start(p, &q, sample_rate_hz, count);
        std::vector<double> y(count);
        for (std::size_t n = 0; n < count; ++n) y[n] = static_cast<double>(note[n]) - copy[n] + own[n];
        const double min_extra = past_strongest ? params.min_short_lived_extra * signal : 0.0;
        const auto fit = fit_glide(y, q, gain_lin, sample_rate_hz, block, params, grid, min_extra);
        if (!fit) continue;
        const glide_fit& best = *fit;
        const partial p_before_glide = q;
        q.glide_cents = best.cents;
        q.glide_s = best.glide_s;
        q.phase_rad = std::arg(best.amp);
        scale_start(q.env, std::abs(best.amp), params.max_level_change_db);
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

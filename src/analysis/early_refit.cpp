// The strong partials' phases and start levels on the finished copy's first span (see early_refit.hpp).
#include "analysis/early_refit.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <complex>
#include <numbers>
#include <cstring>
#include <numeric>
#include <optional>
#include <vector>

#include "analysis/early_stage.hpp"
#include "analysis/onset_glide.hpp"
#include "core/envelope.hpp"
#include "core/units.hpp"
#include "synthesis/kernel_clones.hpp"
#include "synthesis/render.hpp"

namespace wane {

namespace {

/// The partials of `partials` alone (no noise) over the first out.size() frames at rate_hz, as the
/// renderer plays them (the note's gain included), into out (the render writes every frame, so
/// the buffers it is given are never zeroed first). `one` is the patch rendered, p's header with
/// these partials, kept between calls so that its storage is reused; renderer_of makes the
/// renderer of a render over `frames`.
partial_renderer renderer_of(const patch& p, std::span<const partial> partials, double rate_hz, patch& one, std::size_t frames) {
    one.version = p.version, one.note = p.note;
    one.partials.assign(partials.begin(), partials.end());
    one.note.length_s = static_cast<double>(frames) / rate_hz + 2.0 * end_fade_s;  // its fade past the span
    return partial_renderer(one, {.sample_rate_hz = rate_hz, .include_noise = false});
}

void render_into(const patch& p, std::span<const partial> partials, double rate_hz, patch& one, std::span<float> out) {
    renderer_of(p, partials, rate_hz, one, out.size()).render(0, out);
}

/// Four doubles side by side (GCC/Clang vector extensions: one AVX register, two SSE registers).
using lanes = double __attribute__((vector_size(32)));

/// Four floats side by side, widened to lanes by __builtin_convertvector (exact).
using float_lanes = float __attribute__((vector_size(16)));

/// What swapping own for moved in the copy does to the residual d = x - copy over d's frames: the
/// change of its energy over the frames from `count` on (sum (own - moved)(2 d + own - moved), whose
/// sign needs no rounding of two large sums; late_change), and its energy over the first `count`
/// frames after the swap (sum (d + own - moved)^2; early_energy). Every fourth frame in one lane,
/// the lanes added at the end ((l0 + l1) + (l2 + l3), then the frames past the last four): four
/// chains of additions in flight. Compiled for AVX2 and the baseline (synthesis/kernel_clones.hpp).
WANE_KERNEL_CLONES
void swap_sums(const double* __restrict d, const float* __restrict own, const float* __restrict moved, std::size_t count,
               std::size_t frames, double& late_change, double& early_energy) {
    lanes late{}, early{};
    std::size_t n = 0;
    for (; n + 4 <= count; n += 4) {
        lanes dn, o, m;
        float_lanes of, mf;
        std::memcpy(&dn, d + n, sizeof dn), std::memcpy(&of, own + n, sizeof of), std::memcpy(&mf, moved + n, sizeof mf);
        o = __builtin_convertvector(of, lanes), m = __builtin_convertvector(mf, lanes);
        const lanes e = dn + (o - m);
        early += e * e;
    }
    double early_rest = 0.0;
    for (; n < count; ++n) {
        const double e = d[n] + (static_cast<double>(own[n]) - static_cast<double>(moved[n]));
        early_rest += e * e;
    }
    for (; n + 4 <= frames; n += 4) {
        lanes dn, o, m;
        float_lanes of, mf;
        std::memcpy(&dn, d + n, sizeof dn), std::memcpy(&of, own + n, sizeof of), std::memcpy(&mf, moved + n, sizeof mf);
        o = __builtin_convertvector(of, lanes), m = __builtin_convertvector(mf, lanes);
        const lanes step = o - m;
        late += step * (2.0 * dn + step);
    }
    double late_rest = 0.0;
    for (; n < frames; ++n) {
        const double step = static_cast<double>(own[n]) - static_cast<double>(moved[n]);
        late_rest += step * (2.0 * d[n] + step);
    }
    late_change = ((late[0] + late[1]) + (late[2] + late[3])) + late_rest;
    early_energy = ((early[0] + early[1]) + (early[2] + early[3])) + early_rest;
}

/// The five sums of complex_scale over n < count, four frames at a time in lanes (as swap_sums).
WANE_KERNEL_CLONES
void scale_sums(const double* __restrict d, const float* __restrict w_f, const float* __restrict wq_f, std::size_t count,
                std::array<double, 5>& out) {
    lanes ww{}, wqwq{}, wwq{}, yw{}, ywq{};
    std::size_t n = 0;
    for (; n + 4 <= count; n += 4) {
        lanes dn;
        float_lanes wf, wqf;
        std::memcpy(&dn, d + n, sizeof dn), std::memcpy(&wf, w_f + n, sizeof wf), std::memcpy(&wqf, wq_f + n, sizeof wqf);
        const lanes w = __builtin_convertvector(wf, lanes), wq = __builtin_convertvector(wqf, lanes);
        const lanes y = dn + w;
        ww += w * w;
        wqwq += wq * wq;
        wwq += w * wq;
        yw += y * w;
        ywq += y * wq;
    }
    const std::array<lanes, 5> sums{ww, wqwq, wwq, yw, ywq};
    for (std::size_t i = 0; i < sums.size(); ++i) out[i] = (sums[i][0] + sums[i][1]) + (sums[i][2] + sums[i][3]);
    for (; n < count; ++n) {
        const auto w = static_cast<double>(w_f[n]), wq = static_cast<double>(wq_f[n]);
        const double y = d[n] + w;
        out[0] += w * w;
        out[1] += wq * wq;
        out[2] += w * wq;
        out[3] += y * w;
        out[4] += y * wq;
    }
}

/// z = alpha + j beta of the least squares y ~ alpha w + beta w' with y = d + w (the residual d with
/// the partial's own part put back), over w's frames; zero where the 2 x 2 system is singular.
std::complex<double> complex_scale(std::span<const double> d, std::span<const float> w_f, std::span<const float> wq_f) {
    std::array<double, 5> sums{};
    scale_sums(d.data(), w_f.data(), wq_f.data(), wq_f.size(), sums);
    const auto [ww, wqwq, wwq, yw, ywq] = sums;
    const double det = ww * wqwq - wwq * wwq;
    if (!(det > 1e-12 * ww * wqwq)) return {};
    return {(yw * wqwq - ywq * wwq) / det, (ywq * ww - yw * wwq) / det};
}

double energy(std::span<const double> v) {
    return std::inner_product(v.begin(), v.end(), v.begin(), 0.0);
}

/// q with its attack ending at attack_s and its level from q's attack end on unchanged: the peak
/// moves by the decay between the two ends (dB), so only the first q.env.attack_s seconds change.
partial with_attack(const partial& q, double attack_s) {
    partial c = q;
    c.env.attack_s = attack_s;
    const double keep_s = q.env.attack_s;
    c.env.peak = level_db{c.env.peak.db + envelope_level(q.env, keep_s).db - envelope_level(c.env, keep_s).db};
    return c;
}

struct trial_frames {
    std::size_t count = 0;  ///< the span's frames
    std::size_t total = 0;  ///< the check span's frames
    double rate_hz = 0.0;
};

/// c rendered over the check span into moved (total frames) and what swapping own for it in the
/// copy does (swap_sums: late_change over [count, total), early over [0, count)), the later part
/// first: the frames from the last multiple of render_anchor_frames at or before count on (bit for
/// bit those of the whole render), their late_change, and only where that is at most late_limit
/// (the test that fails more often) the frames before them and the span's energy; early is infinity
/// and moved's first frames left unwritten otherwise. The two swap_sums calls add each frame in
/// the lane and order of one call over both parts.
void render_checked(const patch& p, const partial& c, std::span<const double> d, std::span<const float> own,
                    const trial_frames& f, double late_limit, patch& one, std::span<float> moved, double& late_change,
                    double& early) {
    assert(moved.size() == f.total && d.size() >= f.total && own.size() >= f.total);
    const partial_renderer r = renderer_of(p, std::span(&c, 1), f.rate_hz, one, f.total);
    const std::size_t head = f.count / render_anchor_frames * render_anchor_frames;
    r.render(head, moved.subspan(head));
    double none = 0.0;  // the calls' other sum, over no frames
    swap_sums(d.data() + f.count, own.data() + f.count, moved.data() + f.count, 0, f.total - f.count, late_change, none);
    early = infinity;
    if (late_change > late_limit) return;
    if (head > 0) r.render(0, moved.first(head));
    swap_sums(d.data(), own.data(), moved.data(), f.count, f.count, none, early);
}

/// Storage reused from one trial to the next: cand holds the check span's frames (a render over the
/// span alone in its first ones), quad the span's, spare the trials' renders no longer wanted.
struct trial_buffers {
    std::vector<float> cand, quad;
    std::vector<double> put_back;
    std::vector<std::vector<float>> spare;
    /// A buffer of `frames` floats, its values left as they are (every caller writes them all).
    std::vector<float> take(std::size_t frames) {
        if (spare.empty()) return std::vector<float>(frames);
        std::vector<float> v = std::move(spare.back());
        spare.pop_back();
        assert(v.size() == frames);
        return v;
    }
    void give(std::vector<float>&& v) { if (!v.empty()) spare.push_back(std::move(v)); }
};

struct trial {
    partial refit;
    std::vector<float> moved;    ///< refit rendered over the check span
    double early = 0.0;          ///< the span's residual energy with refit in the copy
    double late_change = 0.0;    ///< change of the residual energy over [span, check span)
};

/// q, or q with its attack shortened (with_attack) to the fraction of it (attack_fractions) whose
/// copy leaves the least over the span, where q's attack lasts from min_attack_s to the span (so
/// that nothing past the span changes) and that least is under `residual`, the span's residual with
/// q; the trial holds the render over the check span (q's past the span) and that residual.
std::optional<trial> shorter_attack(const patch& p, const partial& q, std::span<const double> d, std::span<const float> own,
                                    double residual, const trial_frames& f, const early_refit_params& params, patch& one,
                                    trial_buffers& buf) {
    const double attack_s = q.env.attack_s;
    if (attack_s < params.min_attack_s || attack_s > static_cast<double>(f.count) / f.rate_hz) return std::nullopt;
    std::optional<trial> best;
    for (const double fraction : params.attack_fractions) {
        const partial c = with_attack(q, fraction * attack_s);
        const std::span<float> cand = std::span(buf.cand).first(f.count);
        render_into(p, std::span(&c, 1), f.rate_hz, one, cand);
        double late_change = 0.0, e = 0.0;  // over the span alone (no frames past it)
        swap_sums(d.data(), own.data(), cand.data(), f.count, f.count, late_change, e);
        if (!(e < (best ? best->early : residual))) continue;
        if (!best) {
            best = trial{.refit = c, .moved = buf.take(own.size()), .early = e, .late_change = 0.0};
            std::copy(own.begin(), own.end(), best->moved.begin());
        }
        best->refit = c, best->early = e;
        std::copy(cand.begin(), cand.end(), best->moved.begin());
    }
    return best;
}

/// c (q, whose render over the check span is `own`, with a shorter attack, or q itself: is_q) refitted
/// in q's place by the least-squares complex scale of c's render on what the copy leaves with q
/// taken out, applied as a phase and a start level (scale_envelope_start); none where the scale
/// is 0.
std::optional<trial> fit_trial(const patch& p, const partial& c, bool is_q, std::span<const double> d,
                               std::span<const float> own, const trial_frames& f, const early_refit_params& params,
                               patch& one, trial_buffers& buf) {
    partial turned = c;
    turned.phase_rad += 0.5 * std::numbers::pi;
    const std::span<float> quad = std::span(buf.quad).first(f.count);
    render_into(p, std::span(&turned, 1), f.rate_hz, one, quad);
    // complex_scale fits d + w on w: for another c than q, d with q's render swapped for c's.
    std::span<const double> y = d.first(f.count);
    std::span<const float> w = own.first(f.count);
    if (!is_q) {
        const std::span<float> cand = std::span(buf.cand).first(f.count);
        render_into(p, std::span(&c, 1), f.rate_hz, one, cand);
        buf.put_back.resize(f.count);
        for (std::size_t n = 0; n < f.count; ++n)
            buf.put_back[n] = d[n] + (static_cast<double>(own[n]) - static_cast<double>(cand[n]));
        y = buf.put_back, w = cand;
    }
    const std::complex<double> z = complex_scale(y, w, quad);
    if (!(std::abs(z) > 0.0)) return std::nullopt;
    trial t{.refit = c, .moved = {}, .early = 0.0, .late_change = 0.0};
    t.refit.phase_rad = std::remainder(c.phase_rad + std::arg(z), two_pi);
    scale_envelope_start(t.refit.env, std::abs(z), params.max_level_change_db);
    t.moved = buf.take(f.total);
    render_checked(p, t.refit, d, own, f, 0.0, one, t.moved, t.late_change, t.early);
    return t;
}

/// q's early stage (analysis/early_stage.hpp) refitted on d, cur being q's render over the check
/// span; kept, with d and residual (the span's) updated, where the span's residual falls and the
/// residual over [span, check span) does not rise by more than the renders' rounding
/// (late_rounding of the span's signal energy: the stage leaves q's level from its join on as it
/// was, but the renderer starts a new run there).
bool refit_stage(const patch& p, partial& q, std::vector<double>& d, std::span<const float> cur, double& residual,
                 double signal, const trial_frames& f, const early_refit_params& params, patch& one, trial_buffers& buf) {
    if (!params.stage.enabled) return false;
    const std::optional<early_stage_fit> fit =
        fit_early_stage(d, cur.first(f.count), q.env.attack_s, f.rate_hz, signal, params.stage);
    if (!fit) return false;
    partial c = q;
    c.env = with_early_stage(q.env, *fit);
    double late_change = 0.0, early = 0.0;
    render_checked(p, c, d, cur, f, params.late_rounding * signal, one, buf.cand, late_change, early);
    if (late_change > params.late_rounding * signal || !(early < residual)) return false;
    for (std::size_t n = 0; n < f.total; ++n) d[n] += static_cast<double>(cur[n]) - static_cast<double>(buf.cand[n]);
    residual = early;
    q = std::move(c);
    return true;
}

}  // namespace

early_refit_summary refit_early_phases(patch& p, std::span<const float> note, double sample_rate_hz,
                                       const early_refit_params& params) {
    assert(sample_rate_hz > 0.0 && params.check_s >= params.span_s);
    early_refit_summary summary;
    const auto to_frames = [&](double s) { return std::min(note.size(), static_cast<std::size_t>(std::llround(s * sample_rate_hz))); };
    const std::size_t count = to_frames(params.span_s);
    const std::size_t total = std::max(count, to_frames(params.check_s));
    if (p.partials.empty() || count < 64) return summary;
    const std::span<const float> x = note.first(count);
    double signal = 0.0;
    for (const float v : x) signal += static_cast<double>(v) * static_cast<double>(v);
    if (!(signal > 0.0)) return summary;

    // The partials by their start level (the end of the attack), loudest first.
    const auto start_db = [&](std::size_t i) { return envelope_level(p.partials[i].env, p.partials[i].env.attack_s).db; };
    std::vector<std::size_t> order(p.partials.size());
    std::iota(order.begin(), order.end(), std::size_t{0});
    std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) { return start_db(a) > start_db(b); });
    const double loudest_db = start_db(order.front());

    // The renders in float as the renderer gives them (each taken to double where it is used:
    // exact); d, the residual x - copy over the whole check span, in double.
    patch one{.version = p.version, .note = p.note, .source = {}, .partials = {}, .noise = {}};
    std::vector<float> own(total);
    render_into(p, p.partials, sample_rate_hz, one, own);
    std::vector<double> d(total);
    for (std::size_t n = 0; n < total; ++n) d[n] = static_cast<double>(note[n]) - static_cast<double>(own[n]);
    double residual = energy(std::span<const double>(d).first(count));
    summary.residual_before_db = to_level(amp_lin{std::sqrt(residual / signal)}).db;
    trial_buffers buf{.cand = std::vector<float>(total), .quad = std::vector<float>(count), .put_back = {}, .spare = {}};
    for (const std::size_t k : order) {
        if (start_db(k) < loudest_db - params.range_db) break;
        partial& q = p.partials[k];
        if (!(q.freq_hz > 0.0) || q.freq_hz >= 0.5 * sample_rate_hz) continue;
        render_into(p, std::span(&q, 1), sample_rate_hz, one, own);
        const trial_frames frames{.count = count, .total = total, .rate_hz = sample_rate_hz};
        // q refitted; q with a shorter attack where that leaves less, as it is or refitted: the
        // one that leaves least over the span.
        std::optional<trial> best = shorter_attack(p, q, d, own, residual, frames, params, one, buf);
        const std::optional<partial> shorter = best ? std::optional<partial>(best->refit) : std::nullopt;
        for (const partial* c : std::array<const partial*, 2>{&q, shorter ? &*shorter : nullptr}) {
            if (c == nullptr) continue;
            std::optional<trial> t = fit_trial(p, *c, c == &q, d, own, frames, params, one, buf);
            // Kept where the later part's residual (to check_s) does not rise, the test that fails
            // more often (on a third to half of the partials of the demo and synthetic notes), and
            // the span's residual falls.
            if (t && !(t->late_change > 0.0) && t->early < (best ? best->early : residual)) {
                if (best) buf.give(std::move(best->moved));
                best = std::move(t);
            } else if (t) {
                buf.give(std::move(t->moved));
            }
        }
        if (best) {
            for (std::size_t n = 0; n < total; ++n) d[n] += static_cast<double>(own[n]) - static_cast<double>(best->moved[n]);
            residual = best->early;
            q = best->refit;
        }
        const bool staged = refit_stage(p, q, d, best ? best->moved : own, residual, signal, frames, params, one, buf);
        if (best || staged) ++summary.refitted;
        if (best) buf.give(std::move(best->moved));
    }
    summary.residual_after_db = to_level(amp_lin{std::sqrt(residual / signal)}).db;
    return summary;
}

}  // namespace wane

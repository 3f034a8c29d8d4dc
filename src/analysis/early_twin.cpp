// Early twins of the strongest partials on the finished copy's first span (see early_twin.hpp).
#include "analysis/early_twin.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <complex>
#include <numbers>
#include <numeric>

#include "analysis/decaying_fit.hpp"
#include "analysis/heard_shift.hpp"
#include "analysis/mode_band.hpp"
#include "core/envelope.hpp"
#include "core/units.hpp"

namespace wane {

namespace {

/// Whether some partial of p lies within min_cents of freq_hz. The cents are measured only for the
/// partials within twice that ratio of freq_hz (the rest are farther: no log2 for them).
bool near_a_partial(const patch& p, double freq_hz, double min_cents) {
    const double wide = std::exp2(2.0 * min_cents / 1200.0);
    return std::any_of(p.partials.begin(), p.partials.end(), [&](const partial& q) {
        return q.freq_hz > 0.0 && q.freq_hz < wide * freq_hz && freq_hz < wide * q.freq_hz &&
               std::abs(1200.0 * std::log2(freq_hz / q.freq_hz)) < min_cents;
    });
}

struct twin_fit {
    double freq_hz = 0.0;
    double t60_s = 0.0;
    one_mode_fit fit;
};

/// The twin at freq_hz of each grid T60 (a resonance) fitted on d (the span's residual); best
/// updated where one explains more. cos_n, sin_n: scratch tables.
void fit_at(std::span<const double> d, double freq_hz, double sample_rate_hz, const early_twin_params& params,
            std::vector<double>& cos_n, std::vector<double>& sin_n, twin_fit& best, std::vector<twin_fit>* each = nullptr) {
    const double omega = two_pi * freq_hz / sample_rate_hz;  // rad/sample
    phasor_table(omega, d.size(), cos_n, sin_n);
    std::size_t at = 0;  // into the grid
    while (at < params.t60_grid_s.size()) {
        std::array<double, fit_lanes> t60_s{}, rho{};
        std::size_t used = 0;
        for (; at < params.t60_grid_s.size() && used < fit_lanes; ++at) {
            const double t60 = params.t60_grid_s[at];
            if (std::numbers::pi * freq_hz * t60 / ln1000 < params.min_q) continue;
            t60_s[used] = t60;
            rho[used++] = -ln1000 / (t60 * sample_rate_hz);
        }
        if (used == 0) break;
        std::array<one_mode_fit, fit_lanes> fits{};
        fit_decaying(d, cos_n, sin_n, omega, std::span(rho).first(used), std::span(fits).first(used));
        for (std::size_t j = 0; j < used; ++j) {
            const twin_fit t{.freq_hz = freq_hz, .t60_s = t60_s[j], .fit = fits[j]};
            if (each != nullptr) each->push_back(t);
            if (t.fit.explained > best.fit.explained) best = t;
        }
    }
}

/// The best twin of the partial at freq_hz on d (the span's residual): the cents grid, then the
/// vertex of the parabola through the best offset's fit and its two neighbours' (the energy each
/// explains), kept where it explains more. each: the fits of every grid T60 at the offset chosen.
/// None (explained 0) where the best lies at the range's edge.
twin_fit search_twin(const patch& p, std::span<const double> d, double freq_hz, double sample_rate_hz,
                     const early_twin_params& params, std::vector<double>& cos_n, std::vector<double>& sin_n,
                     std::vector<twin_fit>& each) {
    const auto steps = static_cast<int>(std::floor(params.max_cents / params.cents_step + 1e-9));
    std::vector<double> explained(static_cast<std::size_t>(2 * steps + 1));  // per grid offset
    twin_fit best;
    int best_i = 0;
    std::vector<twin_fit> fits;
    const auto try_cents = [&](double cents) {
        twin_fit at;
        fits.clear();
        const double f = freq_hz * cents_to_ratio(cents);
        if (std::abs(cents) < params.min_cents || f >= 0.5 * sample_rate_hz || near_a_partial(p, f, params.min_cents)) return at;
        fit_at(d, f, sample_rate_hz, params, cos_n, sin_n, at, &fits);
        if (at.fit.explained > best.fit.explained) {
            best = at;
            each.swap(fits);
        }
        return at;
    };
    each.clear();
    for (int i = -steps; i <= steps; ++i) {
        const double before = best.fit.explained;
        const int slot = i + steps;
        explained[static_cast<std::size_t>(slot)] = try_cents(i * params.cents_step).fit.explained;
        if (best.fit.explained > before) best_i = i;
    }
    // A twin is a peak of the fit inside the range: at its edge the fit follows something wider
    // (a glide, a level error) that a twin farther off would follow too.
    if (!(best.fit.explained > 0.0) || std::abs(best_i) >= steps) return {};
    const int best_slot = best_i + steps;
    const auto at = static_cast<std::size_t>(best_slot);
    const double y0 = explained[at - 1], y1 = explained[at], y2 = explained[at + 1];
    const double curve = y0 - 2.0 * y1 + y2;  // < 0 at a peak
    if (y0 > 0.0 && y2 > 0.0 && curve < 0.0)
        try_cents((best_i + std::clamp(0.5 * (y0 - y2) / curve, -0.5, 0.5)) * params.cents_step);
    return best;
}

/// The twin's samples over frames [0, count) (Re(amp exp(rho n) exp(i omega n))) into w.
void twin_samples(const twin_fit& t, double sample_rate_hz, std::size_t count, std::vector<double>& cos_n,
                  std::vector<double>& sin_n, std::vector<double>& w) {
    phasor_table(two_pi * t.freq_hz / sample_rate_hz, count, cos_n, sin_n);
    const double step = std::exp(-ln1000 / (t.t60_s * sample_rate_hz));
    w.resize(count);
    double e = 1.0;
    for (std::size_t n = 0; n < count; ++n) {
        w[n] = e * (t.fit.amp.real() * cos_n[n] - t.fit.amp.imag() * sin_n[n]);
        e *= step;
    }
}

/// The band of the recording and of the copy around a partial (analysis/mode_band.hpp), at a rate
/// of late_band_share of its frequency within [min_band_rate_hz, max_band_rate_hz].
struct late_bands {
    double freq_hz = 0.0;
    std::size_t d = 3;          ///< samples of the note per band sample
    double band_rate_hz = 0.0;
    std::vector<std::complex<double>> rec;
    double copy_error_db = 0.0; ///< the copy's late_band_error_db
    int blocks = 0;             ///< the blocks it read
};

late_bands late_bands_of(std::span<const float> x, std::span<const float> copy, double freq_hz, double sample_rate_hz,
                         const early_twin_params& params) {
    late_bands out;
    out.freq_hz = freq_hz;
    const double rate_hz = std::clamp(params.late_band_share * freq_hz, params.min_band_rate_hz, params.max_band_rate_hz);
    out.d = static_cast<std::size_t>(std::max(3.0, std::floor(sample_rate_hz / rate_hz)));
    out.band_rate_hz = sample_rate_hz / static_cast<double>(out.d);
    out.rec = band_of(x, freq_hz, sample_rate_hz, out.d);
    out.copy_error_db = late_band_error_db(out.rec, band_of(copy, freq_hz, sample_rate_hz, out.d), out.band_rate_hz, params.late,
                                           &out.blocks);
    return out;
}

/// Whether a twin (peak_db at once in the patch's units, one decay of t60_s) stays no louder than
/// its partial q from span_s to the note's end (length_s), read every under_step_s: a twin that
/// outlasts its partial would stand out alone where the band test reads nothing (past check_s, or
/// where the recording's band has fallen late_range_db under its loudest block).
bool under_its_partial(const partial& q, double peak_db, double t60_s, double length_s, const early_twin_params& params) {
    const auto steps = static_cast<int>(std::floor((length_s - params.span_s) / params.under_step_s + 1e-9));
    for (int i = 0; i <= steps; ++i) {
        const double t = params.span_s + i * params.under_step_s;
        if (peak_db - 60.0 * t / t60_s > envelope_level(q.env, t).db + params.max_over_partial_db) return false;
    }
    return true;
}

/// The twin t of partial q as a partial of the patch: an instant start, one decay, q's harmonic
/// number (two partials with one harmonic number sum), its level in the patch's units.
partial as_partial(const twin_fit& t, const partial& q, double gain_lin) {
    return {.freq_hz = t.freq_hz, .harmonic = q.harmonic, .phase_rad = std::arg(t.fit.amp),
            .env = {.attack_s = 0.0, .peak = to_level(amp_lin{std::abs(t.fit.amp) / gain_lin}),
                    .decay = {{.t60_s = t.t60_s, .until_s = std::nullopt}}},
            .place = {}};
}

/// Whether the twin takes its partial's heard peak (analysis/heard_shift.hpp) further from the
/// recording's (ref_hz; times the ratio) than max_heard_shift_cents and than the copy without it
/// stands, at any of heard_ratios, among the patch's partials and the twins added.
bool moves_heard_pitch(std::span<const partial> partials, std::span<const partial> added, const partial& twin,
                       double freq_hz, double ref_hz, const heard_span_spectrum& heard, const early_twin_params& params) {
    if (!(heard.end_s > heard.start_s)) return false;
    std::vector<partial> near;
    for (const auto& list : {partials, added})
        for (const partial& q : list)
            if (std::abs(q.freq_hz - freq_hz) <= params.heard.near_share * freq_hz) near.push_back(q);
    std::vector<partial> with = near;
    with.push_back(twin);
    return std::any_of(params.heard_ratios.begin(), params.heard_ratios.end(), [&](double ratio) {
        const auto off_cents = [&](std::span<const partial> set) {
            return std::abs(cents_between(copy_heard_peak_hz(set, freq_hz, ratio, heard.start_s, heard.end_s, params.heard), ratio * ref_hz));
        };
        return off_cents(with) > std::max(params.max_heard_shift_cents, off_cents(near));
    });
}

double energy_of(std::span<const double> x) { return std::inner_product(x.begin(), x.end(), x.begin(), 0.0); }

}  // namespace

early_twin_summary add_early_twins(patch& p, std::span<const float> note, double sample_rate_hz,
                                   const early_twin_params& params, const heard_span_spectrum* heard) {
    assert(sample_rate_hz > 0.0 && params.check_s >= params.span_s && params.cents_step >= 1.0);
    early_twin_summary summary;
    const auto to_frames = [&](double s) { return std::min(note.size(), static_cast<std::size_t>(std::llround(s * sample_rate_hz))); };
    const std::size_t count = to_frames(params.span_s);
    const std::size_t total = std::max(count, to_frames(params.check_s));
    if (p.partials.empty() || count < 64) return summary;
    double signal = 0.0;
    for (const float v : note.first(count)) signal += static_cast<double>(v) * static_cast<double>(v);
    if (!(signal > 0.0)) return summary;
    const double min_gain = params.min_gain_share * signal;

    // The partials by their start level (the end of the attack), loudest first.
    const auto start_db = [&](std::size_t i) { return envelope_level(p.partials[i].env, p.partials[i].env.attack_s).db; };
    std::vector<std::size_t> order(p.partials.size());
    std::iota(order.begin(), order.end(), std::size_t{0});
    std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) { return start_db(a) > start_db(b); });
    order.resize(std::min(order.size(), params.max_partials));
    if (order.empty()) return summary;
    const double loudest_db = start_db(order.front());

    // The copy over the check span, its frames past the span made when a late test first reads them.
    copy_start_render copy_render(p, sample_rate_hz, total);
    std::vector<float>& copy = copy_render.at_least(count);
    std::vector<double> d(count);  // the residual x - copy over the span (the search's), double
    for (std::size_t n = 0; n < count; ++n) d[n] = static_cast<double>(note[n]) - static_cast<double>(copy[n]);
    const double gain_lin = to_amp(level_db{p.note.gain_db}).lin;
    std::vector<double> cos_n, sin_n, w;
    std::vector<float> with_twin(total);
    std::vector<partial> added;
    std::vector<double> searched;  // the frequencies searched
    for (const std::size_t k : order) {
        if (start_db(k) < loudest_db - params.range_db) break;
        const partial& q = p.partials[k];
        if (!(q.freq_hz > 0.0) || q.freq_hz >= 0.5 * sample_rate_hz) continue;
        // One search per frequency (a partial split into stages or close modes is one to the ear).
        if (std::any_of(searched.begin(), searched.end(), [&](double f) { return std::abs(1200.0 * std::log2(q.freq_hz / f)) < params.min_cents; }))
            continue;
        searched.push_back(q.freq_hz);
        const std::span<const double> early(d);
        if (2.0 * energy_of(early) < min_gain) break;  // no twin can take that much
        std::vector<twin_fit> each;
        const twin_fit found = search_twin(p, early, q.freq_hz, sample_rate_hz, params, cos_n, sin_n, each);
        if (!(found.fit.explained >= min_gain)) continue;
        // At the offset found, each T60 of the grid that takes enough, the most first: the first
        // that keeps under its partial and passes the band's late test.
        std::stable_sort(each.begin(), each.end(), [](const twin_fit& a, const twin_fit& b) { return a.fit.explained > b.fit.explained; });
        const late_bands bands = late_bands_of(note.first(total), copy_render.at_least(total), q.freq_hz, sample_rate_hz, params);
        const twin_fit* taken = nullptr;
        const double ref_hz = heard != nullptr ? recording_heard_peak_hz(*heard, q.freq_hz, params.heard).value_or(q.freq_hz) : q.freq_hz;
        for (const twin_fit& t : each) {
            if (bands.blocks < params.min_late_blocks) break;  // nothing tells how the twin would last
            if (!(t.fit.explained >= min_gain)) break;
            const double peak_db = to_level(amp_lin{std::abs(t.fit.amp) / gain_lin}).db;
            if (!under_its_partial(q, peak_db, t.t60_s, p.note.length_s, params)) continue;
            twin_samples(t, sample_rate_hz, total, cos_n, sin_n, w);
            for (std::size_t n = 0; n < total; ++n) with_twin[n] = static_cast<float>(static_cast<double>(copy[n]) + w[n]);
            const double with_db = late_band_error_db(bands.rec, band_of(with_twin, q.freq_hz, sample_rate_hz, bands.d), bands.band_rate_hz, params.late);
            if (with_db > bands.copy_error_db + params.late_tolerance_db) continue;
            if (heard != nullptr && moves_heard_pitch(p.partials, added, as_partial(t, q, gain_lin), q.freq_hz, ref_hz, *heard, params)) {
                ++summary.refused_pitch;
                continue;
            }
            taken = &t;
            break;
        }
        if (taken == nullptr) {
            ++summary.refused_late;
            continue;
        }
        const twin_fit& t = *taken;
        copy.swap(with_twin);
        for (std::size_t n = 0; n < count; ++n) d[n] -= w[n];
        added.push_back(as_partial(t, q, gain_lin));
    }
    p.partials.insert(p.partials.end(), added.begin(), added.end());
    summary.added = static_cast<int>(added.size());
    return summary;
}

}  // namespace wane

#include "analysis/early_companion.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <complex>
#include <functional>
#include <numbers>
#include <optional>
#include <utility>

#include "analysis/decaying_fit.hpp"
#include "analysis/onset_attack.hpp"
#include "core/envelope.hpp"
#include "core/units.hpp"
#include "modes/fit_memo.hpp"

namespace wane {

namespace {

/// Energy of a partial with envelope env (times gain_lin) over [0, span_s]: sum over samples of
/// a(t)^2 / 2 (a sinusoid's mean square), a(t) read every millisecond.
/// env's pieces made once for the loops over times below (none without a decay, which they then
/// never read: envelope_level needs them only from the attack's end on).
std::vector<envelope_piece> pieces_of(const envelope& env) { return env.decay.empty() ? std::vector<envelope_piece>{} : envelope_pieces(env); }

double span_energy(const envelope& env, double gain_lin, double sample_rate_hz, double span_s) {
    constexpr double step_s = 0.001;
    const std::vector<envelope_piece> pieces = pieces_of(env);
    double sum = 0.0;
    for (int j = 0; j < static_cast<int>(span_s / step_s); ++j) {
        const double a = gain_lin * to_amp(envelope_level(env, pieces, step_s * (j + 0.5))).lin;
        sum += 0.5 * a * a;
    }
    return sum * step_s * sample_rate_hz;
}

/// The loudest level of env over [0, span_s], sampled every 5 ms and at the attack's end, dB.
double span_peak_db(const envelope& env, double span_s) {
    constexpr double step_s = 0.005;
    const std::vector<envelope_piece> pieces = pieces_of(env);
    double peak = envelope_level(env, pieces, std::min(env.attack_s, span_s)).db;
    for (int i = 0; i <= static_cast<int>(span_s / step_s); ++i) peak = std::max(peak, envelope_level(env, pieces, step_s * i).db);
    return peak;
}

double energy_of(std::span<const double> x) {
    double e = 0.0;
    for (const double v : x) e += v * v;
    return e;
}

/// One candidate start in the onset fit: the partial with `shape`, and a companion of decay
/// companion_decay (1/s; 0: none), fitted by least squares on r; what is left of r, and its energy.
/// left_energy: the fit's own (its closed form, fit_shaped_amplitudes's residual share times
/// r_energy, the energy of r); left, r minus the candidate sample by sample, only for the one taken.
struct candidate {
    std::vector<damped_mode> modes;
    std::vector<mode_shape> shapes;
    double left_energy = 0.0;
};

candidate fit_candidate(std::span<const float> r, double r_energy, double sample_rate_hz, const damped_mode& partial,
                        const mode_shape& shape, double companion_decay, shaped_fit_memo& memo, shaped_fit_memo& seen) {
    candidate c;
    c.modes.push_back({.freq_hz = partial.freq_hz, .decay_per_s = partial.decay_per_s});
    c.shapes.push_back(shape);
    if (companion_decay > 0.0) {
        c.modes.push_back({.freq_hz = partial.freq_hz, .decay_per_s = companion_decay});
        c.shapes.emplace_back();
    }
    add_projections(memo, seen);  // both on r: memo holds the partial's last fit when seen holds any
    c.left_energy = r_energy * fit_shaped_amplitudes(r, sample_rate_hz, c.modes, c.shapes, 1e-9, nullptr, &memo);
    add_projections(seen, memo);
    return c;
}

/// A companion of this T60 at freq_hz is a resonance, not a burst: its quality factor
/// Q = pi f / d (f over its -3 dB bandwidth d / pi; d = ln1000 / T60, 1/s) is at least min_q.
bool is_resonance(double freq_hz, double t60_s, const early_companion_params& params) {
    return std::numbers::pi * freq_hz * t60_s / ln1000 >= params.min_q;
}

/// A fitted amplitude in dB (of a shaped mode: its shape's scale, 0 dB as its envelope has it).
double amp_db(const damped_mode& m) { return to_level(amp_lin{std::abs(m.amp)}).db; }

}  // namespace

void add_stft_start(stft_starts& out, const envelope& env, bool may_take, double sample_rate_hz, std::size_t count) {
    out.peak_db.push_back(span_peak_db(env, static_cast<double>(count) / sample_rate_hz));
    const bool rises = env.attack_s > 0.0 || (!env.decay.empty() && env.decay.front().t60_s < 0.0);
    out.shapes.push_back(may_take && rises ? envelope_shape(env, sample_rate_hz, count) : mode_shape{});
}

stft_switch choose_stft_starts(std::span<const double> joint, double sample_rate_hz, std::span<const damped_mode> modes,
                               std::span<const mode_shape> shapes, const stft_starts& stft, std::span<const double> energy,
                               double span_energy, const early_companion_params& params) {
    assert(shapes.size() == modes.size() && stft.shapes.size() == modes.size() && stft.peak_db.size() == modes.size() &&
           energy.size() == modes.size());
    stft_switch out;
    if (modes.empty() || joint.empty() || !(span_energy > 0.0)) return out;
    std::vector<std::pair<double, std::size_t>> order;
    for (std::size_t i = 0; i < modes.size(); ++i) order.emplace_back(energy[i], i);
    std::sort(order.begin(), order.end(), std::greater<>());
    const double floor_energy = order.front().first * std::pow(10.0, -params.range_db / 10.0);
    // Only a partial with an STFT shape may switch; the residual left past the last of them is
    // never used. A switch lowers the residual by min_gain_share * span_energy more than `kept`
    // leaves, which leaves at most the residual's energy (kept includes the partial alone refitted
    // by least squares, which can match its fitted amplitude), so a switch needs that much residual
    // energy; the residual's energy does not rise from one partial to the next, so once it is under
    // half that (a margin over rounding) no later partial can switch either.
    const auto may_switch = [&](std::size_t i) {
        return !stft.shapes[i].empty() && modes[i].freq_hz > 0.0 && modes[i].freq_hz < 0.5 * sample_rate_hz;
    };
    std::size_t taken = 0;  // order[0, taken): the partials visited
    for (std::size_t at = 0; at < order.size() && order[at].first >= floor_energy; ++at)
        if (may_switch(order[at].second)) taken = at + 1;
    const double min_gain = params.min_gain_share * span_energy;
    std::vector<double> residual(joint.begin(), joint.end());
    double residual_energy = energy_of(residual);
    std::vector<float> with_own(residual.size());
    const std::vector<float> silence(residual.size());
    shaped_fit_memo memo;
    for (const auto& [e, i] : std::span(order).first(taken)) {
        if (residual_energy < 0.5 * min_gain) break;
        if (!(modes[i].freq_hz > 0.0) || modes[i].freq_hz >= 0.5 * sample_rate_hz) continue;
        // The residual with the partial's own part put back (as fitted; float, as the fit's target).
        const std::vector<double> minus_own = joint_residual(silence, sample_rate_hz, modes.subspan(i, 1), shapes.subspan(i, 1));
        for (std::size_t n = 0; n < residual.size(); ++n) with_own[n] = static_cast<float>(residual[n] - minus_own[n]);
        double own_energy = 0.0;  // of with_own, summed as fit_shaped_amplitudes sums it
        for (const float v : with_own) own_energy += static_cast<double>(v) * static_cast<double>(v);
        // The fitted shape's candidates, then the STFT shape's: each fit after the first shares
        // its partial's projection with the one before (the memo's, the same numbers), and the
        // STFT shape's take the companions' projections from the fitted shape's (seen: every
        // projection the partial's fits made, on with_own).
        shaped_fit_memo seen{};
        candidate kept = fit_candidate(with_own, own_energy, sample_rate_hz, modes[i], shapes[i], 0.0, memo, seen);
        for (const double t60_s : params.t60_grid_s) {
            if (!is_resonance(modes[i].freq_hz, t60_s, params)) continue;
            candidate c = fit_candidate(with_own, own_energy, sample_rate_hz, modes[i], shapes[i], ln1000 / t60_s, memo, seen);
            if (c.left_energy < kept.left_energy) kept = std::move(c);
        }
        std::optional<candidate> switched;
        for (const double t60_s : params.t60_grid_s) {
            if (stft.shapes[i].empty() || !is_resonance(modes[i].freq_hz, t60_s, params)) continue;
            candidate c = fit_candidate(with_own, own_energy, sample_rate_hz, modes[i], stft.shapes[i], ln1000 / t60_s, memo, seen);
            if (std::abs(amp_db(c.modes[0])) <= params.max_shape_scale_db &&
                amp_db(c.modes[1]) <= stft.peak_db[i] + params.max_over_stft_db &&
                (!switched || c.left_energy < switched->left_energy))
                switched = std::move(c);
        }
        if (switched && switched->left_energy <= kept.left_energy - min_gain) {
            out.partials.push_back(i);
            out.companions.push_back(switched->modes[1]);
            residual = joint_residual(with_own, sample_rate_hz, switched->modes, switched->shapes);
        } else {
            residual = joint_residual(with_own, sample_rate_hz, kept.modes, kept.shapes);
        }
        residual_energy = energy_of(residual);
    }
    return out;
}

int add_early_companions(patch& p, std::span<const float> note, double sample_rate_hz,
                         const early_companion_params& params) {
    assert(sample_rate_hz > 0.0);
    const auto count = std::min(note.size(), static_cast<std::size_t>(std::llround(params.span_s * sample_rate_hz)));
    if (p.partials.empty() || count < 64) return 0;
    const double span_s = static_cast<double>(count) / sample_rate_hz;
    const std::vector<float> copy = render_copy_start(p, sample_rate_hz, count);
    std::vector<double> residual(copy.begin(), copy.end());
    double signal = 0.0;
    for (std::size_t n = 0; n < count; ++n) {
        residual[n] = static_cast<double>(note[n]) - residual[n];
        signal += static_cast<double>(note[n]) * static_cast<double>(note[n]);
    }
    if (!(signal > 0.0)) return 0;
    // A companion takes at most the residual's energy (a least-squares projection), so a partial
    // whose bar is over it (by a factor 2, a margin over rounding) is passed over without its fit.
    double residual_energy = energy_of(residual);
    // The partials by their loudest level over the span, the loudest first.
    std::vector<std::pair<double, std::size_t>> order;
    for (std::size_t k = 0; k < p.partials.size(); ++k) order.emplace_back(span_peak_db(p.partials[k].env, span_s), k);
    std::sort(order.begin(), order.end(), std::greater<>());
    const double gain_lin = to_amp(level_db{p.note.gain_db}).lin;
    std::vector<double> cos_n, sin_n;
    std::vector<partial> added;
    for (const auto& [peak_db, k] : order) {
        if (peak_db < order.front().first - params.range_db) break;
        const double freq_hz = p.partials[k].freq_hz;
        if (!(freq_hz > 0.0) || freq_hz >= 0.5 * sample_rate_hz) continue;
        // What a companion must explain: a share of the span's energy, and of its partial's own
        // energy there (a small level error of a strong partial leaves no stage to follow).
        const double own_energy = span_energy(p.partials[k].env, gain_lin, sample_rate_hz, span_s);
        const double min_explained = std::max(params.min_gain_share * signal, params.min_partial_share * own_energy);
        if (2.0 * residual_energy < min_explained) continue;
        const double omega = two_pi * freq_hz / sample_rate_hz;  // rad/sample
        phasor_table(omega, count, cos_n, sin_n);
        one_mode_fit best;
        double best_t60_s = 0.0;
        std::size_t at = 0;  // into the grid
        while (at < params.t60_grid_s.size()) {
            std::array<double, fit_lanes> t60_s{}, rho{};
            std::size_t used = 0;
            for (; at < params.t60_grid_s.size() && used < fit_lanes; ++at) {
                if (!is_resonance(freq_hz, params.t60_grid_s[at], params)) continue;
                t60_s[used] = params.t60_grid_s[at];
                rho[used++] = -ln1000 / (params.t60_grid_s[at] * sample_rate_hz);
            }
            if (used == 0) break;
            std::array<one_mode_fit, fit_lanes> fits{};
            fit_decaying(residual, cos_n, sin_n, omega, std::span(rho).first(used), std::span(fits).first(used));
            for (std::size_t j = 0; j < used; ++j)
                if (fits[j].explained > best.explained) best = fits[j], best_t60_s = t60_s[j];
        }
        if (!(best.explained >= min_explained)) continue;
        // Taken off the residual: the next partial's companion is fitted on what is left.
        const double step = std::exp(-ln1000 / (best_t60_s * sample_rate_hz));
        double e = 1.0;
        for (std::size_t n = 0; n < count; ++n) {
            residual[n] -= e * (best.amp.real() * cos_n[n] - best.amp.imag() * sin_n[n]);
            e *= step;
        }
        residual_energy = energy_of(residual);
        added.push_back({.freq_hz = freq_hz, .harmonic = 0, .phase_rad = std::arg(best.amp),
                         .env = {.attack_s = 0.0, .peak = to_level(amp_lin{std::abs(best.amp) / gain_lin}),
                                 .decay = {{.t60_s = best_t60_s, .until_s = std::nullopt}}},
                         .place = {}});
    }
    p.partials.insert(p.partials.end(), added.begin(), added.end());
    return static_cast<int>(added.size());
}

}  // namespace wane

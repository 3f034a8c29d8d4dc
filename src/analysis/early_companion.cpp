#include "analysis/early_companion.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <complex>
#include <functional>
#include <numbers>
#include <optional>
#include <utility>

#include "analysis/onset_attack.hpp"
#include "core/envelope.hpp"
#include "core/units.hpp"
#include "synthesis/render.hpp"

namespace wane {

namespace {

/// The partials of p alone (no noise) over the first count samples at rate_hz, the patch's gain
/// included.
std::vector<double> render_partials(const patch& p, double rate_hz, std::size_t count) {
    patch one{.version = p.version, .note = p.note, .source = p.source, .partials = p.partials, .noise = {}};
    one.note.length_s = static_cast<double>(count) / rate_hz + 2.0 * end_fade_s;  // its fade past the span
    const partial_renderer r(one, {.sample_rate_hz = rate_hz, .include_noise = false});
    std::vector<float> y(count);
    r.render(0, y);
    return {y.begin(), y.end()};
}

/// cos and sin of omega n for n in [0, count): a rotation by exp(i omega), re-anchored from the
/// exact phase every 512 samples.
void phasor_table(double omega, std::size_t count, std::vector<double>& cos_n, std::vector<double>& sin_n) {
    constexpr std::size_t anchor_every = 512;
    cos_n.resize(count);
    sin_n.resize(count);
    const double step_c = std::cos(omega), step_s = std::sin(omega);
    double c = 1.0, s = 0.0;
    for (std::size_t n = 0; n < count; ++n) {
        if (n % anchor_every == 0) {
            const double phase = std::remainder(omega * static_cast<double>(n), two_pi);
            c = std::cos(phase), s = std::sin(phase);
        }
        cos_n[n] = c, sin_n[n] = s;
        const double next_c = c * step_c - s * step_s;
        s = c * step_s + s * step_c;
        c = next_c;
    }
}

struct one_mode_fit {
    std::complex<double> amp{};  ///< complex amplitude at n = 0
    double explained = 0.0;      ///< energy the mode takes off the residual
};

/// Least squares of Re(amp exp(rho n) exp(i omega n)) = Ar u[n] + Ai v[n], u = e cos, v = -e sin,
/// e = exp(rho n), on r: the 2 x 2 normal equations summed sample by sample (double); the energy
/// explained is theta . rhs.
one_mode_fit fit_decaying(std::span<const double> r, std::span<const double> cos_n, std::span<const double> sin_n,
                          double rho) {
    double uu = 0.0, vv = 0.0, uv = 0.0, ru = 0.0, rv = 0.0;
    const double step = std::exp(rho);
    double e = 1.0;
    for (std::size_t n = 0; n < r.size(); ++n) {
        const double u = e * cos_n[n], v = -e * sin_n[n];
        uu += u * u, vv += v * v, uv += u * v;
        ru += r[n] * u, rv += r[n] * v;
        e *= step;
    }
    const double det = uu * vv - uv * uv;
    if (!(uu > 0.0) || !(det > 1e-12 * uu * vv)) return {};
    const double ar = (vv * ru - uv * rv) / det, ai = (uu * rv - uv * ru) / det;
    return {.amp = {ar, ai}, .explained = ar * ru + ai * rv};
}

/// Energy of a partial with envelope env (times gain_lin) over [0, span_s]: sum over samples of
/// a(t)^2 / 2 (a sinusoid's mean square), a(t) read every millisecond.
double span_energy(const envelope& env, double gain_lin, double sample_rate_hz, double span_s) {
    constexpr double step_s = 0.001;
    double sum = 0.0;
    for (int j = 0; j < static_cast<int>(span_s / step_s); ++j) {
        const double a = gain_lin * to_amp(envelope_level(env, step_s * (j + 0.5))).lin;
        sum += 0.5 * a * a;
    }
    return sum * step_s * sample_rate_hz;
}

/// The loudest level of env over [0, span_s], sampled every 5 ms and at the attack's end, dB.
double span_peak_db(const envelope& env, double span_s) {
    constexpr double step_s = 0.005;
    double peak = envelope_level(env, std::min(env.attack_s, span_s)).db;
    for (int i = 0; i <= static_cast<int>(span_s / step_s); ++i) peak = std::max(peak, envelope_level(env, step_s * i).db);
    return peak;
}

double energy_of(std::span<const double> x) {
    double e = 0.0;
    for (const double v : x) e += v * v;
    return e;
}

/// One candidate start in the onset fit: the partial with `shape`, and a companion of decay
/// companion_decay (1/s; 0: none), fitted by least squares on r; what is left of r, and its energy.
struct candidate {
    std::vector<damped_mode> modes;
    std::vector<mode_shape> shapes;
    std::vector<double> left;
    double left_energy = 0.0;
};

candidate fit_candidate(std::span<const float> r, double sample_rate_hz, const damped_mode& partial,
                        const mode_shape& shape, double companion_decay) {
    candidate c;
    c.modes.push_back({.freq_hz = partial.freq_hz, .decay_per_s = partial.decay_per_s});
    c.shapes.push_back(shape);
    if (companion_decay > 0.0) {
        c.modes.push_back({.freq_hz = partial.freq_hz, .decay_per_s = companion_decay});
        c.shapes.emplace_back();
    }
    fit_shaped_amplitudes(r, sample_rate_hz, c.modes, c.shapes);
    c.left = joint_residual(r, sample_rate_hz, c.modes, c.shapes);
    c.left_energy = energy_of(c.left);
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
    std::vector<double> residual(joint.begin(), joint.end());
    std::vector<float> with_own(residual.size());
    const std::vector<float> silence(residual.size());
    for (const auto& [e, i] : order) {
        if (e < floor_energy) break;
        if (!(modes[i].freq_hz > 0.0) || modes[i].freq_hz >= 0.5 * sample_rate_hz) continue;
        // The residual with the partial's own part put back (as fitted; float, as the fit's target).
        const std::vector<double> minus_own = joint_residual(silence, sample_rate_hz, modes.subspan(i, 1), shapes.subspan(i, 1));
        for (std::size_t n = 0; n < residual.size(); ++n) with_own[n] = static_cast<float>(residual[n] - minus_own[n]);
        candidate kept = fit_candidate(with_own, sample_rate_hz, modes[i], shapes[i], 0.0);
        std::optional<candidate> switched;
        for (const double t60_s : params.t60_grid_s) {
            if (!is_resonance(modes[i].freq_hz, t60_s, params)) continue;
            const double decay = ln1000 / t60_s;  // 1/s
            candidate c = fit_candidate(with_own, sample_rate_hz, modes[i], shapes[i], decay);
            if (c.left_energy < kept.left_energy) kept = std::move(c);
            if (stft.shapes[i].empty()) continue;
            c = fit_candidate(with_own, sample_rate_hz, modes[i], stft.shapes[i], decay);
            if (std::abs(amp_db(c.modes[0])) <= params.max_shape_scale_db &&
                amp_db(c.modes[1]) <= stft.peak_db[i] + params.max_over_stft_db &&
                (!switched || c.left_energy < switched->left_energy))
                switched = std::move(c);
        }
        if (switched && switched->left_energy <= kept.left_energy - params.min_gain_share * span_energy) {
            out.partials.push_back(i);
            out.companions.push_back(switched->modes[1]);
            residual = std::move(switched->left);
        } else {
            residual = std::move(kept.left);
        }
    }
    return out;
}

int add_early_companions(patch& p, std::span<const float> note, double sample_rate_hz,
                         const early_companion_params& params) {
    assert(sample_rate_hz > 0.0);
    const auto count = std::min(note.size(), static_cast<std::size_t>(std::llround(params.span_s * sample_rate_hz)));
    if (p.partials.empty() || count < 64) return 0;
    const double span_s = static_cast<double>(count) / sample_rate_hz;
    std::vector<double> residual = render_partials(p, sample_rate_hz, count);
    double signal = 0.0;
    for (std::size_t n = 0; n < count; ++n) {
        residual[n] = static_cast<double>(note[n]) - residual[n];
        signal += static_cast<double>(note[n]) * static_cast<double>(note[n]);
    }
    if (!(signal > 0.0)) return 0;
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
        phasor_table(two_pi * freq_hz / sample_rate_hz, count, cos_n, sin_n);
        one_mode_fit best;
        double best_t60_s = 0.0;
        for (const double t60_s : params.t60_grid_s) {
            if (!is_resonance(freq_hz, t60_s, params)) continue;
            const one_mode_fit f = fit_decaying(residual, cos_n, sin_n, -ln1000 / (t60_s * sample_rate_hz));
            if (f.explained > best.explained) best = f, best_t60_s = t60_s;
        }
        // What a companion must explain: a share of the span's energy, and of its partial's own
        // energy there (a small level error of a strong partial leaves no stage to follow).
        const double own_energy = span_energy(p.partials[k].env, gain_lin, sample_rate_hz, span_s);
        if (!(best.explained >= std::max(params.min_gain_share * signal, params.min_partial_share * own_energy))) continue;
        // Taken off the residual: the next partial's companion is fitted on what is left.
        const double step = std::exp(-ln1000 / (best_t60_s * sample_rate_hz));
        double e = 1.0;
        for (std::size_t n = 0; n < count; ++n) {
            residual[n] -= e * (best.amp.real() * cos_n[n] - best.amp.imag() * sin_n[n]);
            e *= step;
        }
        added.push_back({.freq_hz = freq_hz, .harmonic = 0, .phase_rad = std::arg(best.amp),
                         .env = {.attack_s = 0.0, .peak = to_level(amp_lin{std::abs(best.amp) / gain_lin}),
                                 .decay = {{.t60_s = best_t60_s, .until_s = std::nullopt}}},
                         .place = {}});
    }
    p.partials.insert(p.partials.end(), added.begin(), added.end());
    return static_cast<int>(added.size());
}

}  // namespace wane

#include "analysis/onset_attack.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <complex>
#include <functional>
#include <utility>

#include "core/units.hpp"

namespace wane {

mode_shape rise_decay_shape(std::size_t attack_n, double rho, std::size_t count) {
    if (attack_n == 0) return exponential_shape(rho, count);
    attack_n = std::min(attack_n, count);
    mode_shape out{{.start = 0, .count = attack_n, .scale = 1.0 / static_cast<double>(attack_n), .rho = 0.0, .power = 1}};
    if (attack_n < count) out.push_back({.start = attack_n, .count = count - attack_n, .scale = 1.0, .rho = rho, .power = 0});
    return out;
}

namespace {

/// Adds sign * Re(amp a[n] exp(i omega n)) for n in [0, out.size()) to out; a is the mode's shape
/// (exp(-d n / fs) when empty). The phasor is re-anchored from the exact power every 512 samples.
void add_mode(const damped_mode& m, const mode_shape& shape, double sample_rate_hz, double sign,
              std::vector<double>& out, std::vector<double>& scratch) {
    const std::size_t count = out.size();
    const mode_shape own = shape.empty() ? exponential_shape(-m.decay_per_s / sample_rate_hz, count) : shape;
    shape_samples(own, count, scratch);
    const double omega = two_pi * m.freq_hz / sample_rate_hz;
    const std::complex<double> z = std::polar(1.0, omega);
    std::complex<double> p{1.0, 0.0};
    for (std::size_t n = 0; n < count; ++n) {
        if (n % 512 == 0) p = std::polar(1.0, std::remainder(omega * static_cast<double>(n), two_pi));
        out[n] += sign * scratch[n] * (m.amp * p).real();
        p *= z;
    }
}

/// add_mode with sign -1 for every mode, modes_per_pass at a time: per mode and sample the same
/// arithmetic in the same order (so the same sums), the modes' phasor chains overlapped.
void subtract_modes(std::span<const damped_mode> modes, std::span<const mode_shape> shapes, double sample_rate_hz,
                    std::vector<double>& out) {
    constexpr std::size_t modes_per_pass = 4;
    constexpr double sign = -1.0;
    const std::size_t count = out.size();
    std::array<std::vector<double>, modes_per_pass> samples;
    for (std::size_t first = 0; first < modes.size(); first += modes_per_pass) {
        const std::size_t g = std::min(modes_per_pass, modes.size() - first);
        std::array<double, modes_per_pass> omega{};
        std::array<std::complex<double>, modes_per_pass> z{}, p{}, amp{};
        for (std::size_t i = 0; i < g; ++i) {
            const damped_mode& m = modes[first + i];
            const mode_shape& shape = shapes[first + i];
            shape_samples(shape.empty() ? exponential_shape(-m.decay_per_s / sample_rate_hz, count) : shape, count, samples[i]);
            omega[i] = two_pi * m.freq_hz / sample_rate_hz;
            z[i] = std::polar(1.0, omega[i]);
            amp[i] = m.amp;
        }
        for (std::size_t n = 0; n < count; ++n) {
            if (n % 512 == 0)
                for (std::size_t i = 0; i < g; ++i) p[i] = std::polar(1.0, std::remainder(omega[i] * static_cast<double>(n), two_pi));
            for (std::size_t i = 0; i < g; ++i) {
                out[n] += sign * samples[i][n] * (amp[i] * p[i]).real();
                p[i] *= z[i];
            }
        }
    }
}

double energy_of(std::span<const float> x) {
    double e = 0.0;
    for (float v : x) e += double(v) * double(v);
    return e;
}

/// The least-squares fit of one mode Re(amp a[n] exp(i omega n)) with shape a to a signal whose
/// projection on the mode is acc = sum x[n] a[n] exp(i omega n): the 2 x 2 normal equations of
/// (Re amp, Im amp), as in fit_shaped_amplitudes (modes/damped_mode.cpp), with the shape's Gram
/// sums in closed form. Returns the energy the mode explains (theta . rhs) and sets amp.
double fit_one(const mode_shape& a, double omega, std::complex<double> acc, std::complex<double>& amp) {
    const std::complex<double> s_pq = shape_pair_sum(a, a, {0.0, 2.0 * omega});
    const double s_pcq = shape_pair_sum(a, a, {0.0, 0.0}).real();
    const double uu = 0.5 * (s_pq.real() + s_pcq), vv = 0.5 * (s_pcq - s_pq.real());
    const double uv = -0.5 * s_pq.imag();  // Gram entry of (Re, Im): -sum Re p Im p
    const double r0 = acc.real(), r1 = -acc.imag();
    const double det = uu * vv - uv * uv;
    if (!(det > 1e-12 * (uu * vv)) || !(uu > 0.0)) {
        amp = {};
        return 0.0;
    }
    const double t0 = (vv * r0 - uv * r1) / det, t1 = (uu * r1 - uv * r0) / det;
    amp = {t0, t1};
    return t0 * r0 + t1 * r1;
}

}  // namespace

std::vector<std::size_t> choose_attacks(std::span<const float> target, double sample_rate_hz,
                                        std::span<const damped_mode> modes, std::span<const mode_shape> shapes,
                                        std::span<const double> energy, std::span<const std::size_t> may_rise, std::span<const std::size_t> attack_n,
                                        const onset_attack_params& params) {
    assert(shapes.size() == modes.size() && attack_n.size() == modes.size() && energy.size() == modes.size());
    const std::size_t count = target.size();
    std::vector<std::size_t> chosen(attack_n.begin(), attack_n.end());
    const double signal = energy_of(target);
    if (count == 0 || signal <= 0.0 || may_rise.empty()) return chosen;
    // The residual of the joint fit, then each searched mode refitted alone on it plus its own part.
    std::vector<double> residual(target.begin(), target.end()), scratch;
    subtract_modes(modes, shapes, sample_rate_hz, residual);
    // The searched modes by their energy over the span, the strongest first.
    std::vector<std::pair<double, std::size_t>> order;
    for (const std::size_t i : may_rise) order.emplace_back(energy[i], i);
    std::sort(order.begin(), order.end(), std::greater<>());
    const double floor_energy = order.front().first * std::pow(10.0, -params.range_db / 10.0);
    std::vector<std::complex<double>> demod(count), ramp_sum(count + 1), tail_sum(count + 1);
    for (std::size_t r = 0; r < order.size() && r < params.max_partials; ++r) {
        if (order[r].first < floor_energy) break;
        const std::size_t i = order[r].second;
        add_mode(modes[i], shapes[i], sample_rate_hz, 1.0, residual, scratch);
        // With q[n] = residual[n] exp(i omega n), the projection on the rise over T samples then
        // exp(rho (n - T)) is  (1/T) sum_{n<T} n q[n] + t[T],  t[T] = sum_{n>=T} q[n] exp(rho (n - T)):
        // prefix sums of n q[n] and the suffix recursion t[T] = q[T] + exp(rho) t[T + 1] give
        // every T at once, in O(count).
        const double omega = two_pi * modes[i].freq_hz / sample_rate_hz;
        const double rho = -modes[i].decay_per_s / sample_rate_hz;
        const std::complex<double> z = std::polar(1.0, omega);
        std::complex<double> p{1.0, 0.0};
        for (std::size_t n = 0; n < count; ++n) {
            if (n % 512 == 0) p = std::polar(1.0, std::remainder(omega * static_cast<double>(n), two_pi));
            demod[n] = residual[n] * p;
            p *= z;
            ramp_sum[n + 1] = ramp_sum[n] + static_cast<double>(n) * demod[n];
        }
        const double step = std::exp(rho);
        tail_sum[count] = {};
        for (std::size_t n = count; n-- > 0;) tail_sum[n] = demod[n] + step * tail_sum[n + 1];
        const auto explained = [&](std::size_t n_attack, std::complex<double>& amp) {
            const std::complex<double> acc =
                (n_attack == 0 ? std::complex<double>{} : ramp_sum[n_attack] / static_cast<double>(n_attack)) +
                tail_sum[n_attack];
            return fit_one(rise_decay_shape(n_attack, rho, count), omega, acc, amp);
        };
        // The current choice first: another must explain min_gain_share of the signal more.
        std::complex<double> amp;
        const double kept = explained(chosen[i], amp);
        double best = kept;
        std::size_t best_n = chosen[i];
        const auto consider = [&](std::size_t n_attack) {
            std::complex<double> a;
            const double e = explained(n_attack, a);
            if (e > best) best = e, best_n = n_attack;
        };
        if (chosen[i] != 0) consider(0);
        for (const double t : params.attack_grid_s) {
            const auto n_attack = static_cast<std::size_t>(std::llround(t * sample_rate_hz));
            if (n_attack > 0 && n_attack < count && n_attack != chosen[i]) consider(n_attack);
        }
        if (best > kept + params.min_gain_share * signal) chosen[i] = best_n;
        damped_mode refit = modes[i];
        explained(chosen[i], refit.amp);
        add_mode(refit, rise_decay_shape(chosen[i], rho, count), sample_rate_hz, -1.0, residual, scratch);
    }
    return chosen;
}

}  // namespace wane

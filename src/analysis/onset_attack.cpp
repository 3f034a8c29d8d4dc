#include "analysis/onset_attack.hpp"

#include <algorithm>
#include <array>
#include <bit>
#include <cassert>
#include <cmath>
#include <complex>
#include <cstdint>
#include <cstring>
#include <functional>
#include <optional>
#include <span>
#include <type_traits>
#include <utility>

#include "core/units.hpp"
#include "analysis/attack_walk.hpp"
#include "modes/mode_residual.hpp"
#include "synthesis/kernel_clones.hpp"

namespace wane {

mode_shape rise_decay_shape(std::size_t attack_n, double rho, std::size_t count) {
    if (attack_n == 0) return exponential_shape(rho, count);
    attack_n = std::min(attack_n, count);
    mode_shape out{{.start = 0, .count = attack_n, .scale = 1.0 / static_cast<double>(attack_n), .rho = 0.0, .power = 1}};
    if (attack_n < count) out.push_back({.start = attack_n, .count = count - attack_n, .scale = 1.0, .rho = rho, .power = 0});
    return out;
}

std::size_t rise_knot(std::size_t rise_n, int k) {
    return rise_n * static_cast<std::size_t>(k) / static_cast<std::size_t>(rise_segments);
}

double rise_knot_ratio(double start_ratio, int k) {
    return start_ratio + (1.0 - start_ratio) * static_cast<double>(k) / rise_segments;
}

mode_shape attack_shape(const attack_choice& choice, double rho, std::size_t count) {
    if (choice.start_ratio <= 0.0 || choice.rise_n == 0) return rise_decay_shape(choice.rise_n, rho, count);
    // The linear ramp's knots, straight in dB between them (exp pieces), then the decay.
    const std::size_t rise = std::min(choice.rise_n, count);
    mode_shape out;
    for (int k = 0; k < rise_segments; ++k) {
        const std::size_t from = rise_knot(rise, k), to = rise_knot(rise, k + 1);
        if (to <= from) continue;
        const double a = rise_knot_ratio(choice.start_ratio, k), b = rise_knot_ratio(choice.start_ratio, k + 1);
        out.push_back({.start = from, .count = to - from, .scale = a, .rho = std::log(b / a) / static_cast<double>(to - from), .power = 0});
    }
    if (rise < count) out.push_back({.start = rise, .count = count - rise, .scale = 1.0, .rho = rho, .power = 0});
    return out;
}

namespace {

/// Two doubles side by side (GCC/Clang vector extension): a complex's real and imaginary parts.
using two_lanes = double __attribute__((vector_size(16)));

double energy_of(std::span<const float> x) {
    double e = 0.0;
    for (float v : x) e += double(v) * double(v);
    return e;
}

/// The Gram sums of a mode Re(amp a[n] exp(i omega n)) with shape a, in closed form.
attack_gram_memo::sums gram_sums(const mode_shape& a, double omega) {
    return {.s_pq = shape_pair_sum(a, a, {0.0, 2.0 * omega}), .s_pcq = shape_pair_sum(a, a, {0.0, 0.0}).real()};
}

/// gram_sums of the shape of choice c, attack_shape(c, rho, count), from the memo when it holds
/// them (then kept there when computed).
attack_gram_memo::sums gram_sums_of(const attack_choice& c, double omega, double rho, std::size_t count, attack_gram_memo* memo) {
    if (memo == nullptr) return gram_sums(attack_shape(c, rho, count), omega);
    const auto key = std::tuple(std::bit_cast<std::uint64_t>(omega), std::bit_cast<std::uint64_t>(rho), count, c.rise_n,
                                std::bit_cast<std::uint64_t>(c.start_ratio));
    const auto it = memo->kept.find(key);
    if (it != memo->kept.end()) return it->second;
    return memo->kept.emplace(key, gram_sums(attack_shape(c, rho, count), omega)).first->second;
}

/// The least-squares fit of one mode Re(amp a[n] exp(i omega n)) with shape a to a signal whose
/// projection on the mode is acc = sum x[n] a[n] exp(i omega n): the 2 x 2 normal equations of
/// (Re amp, Im amp), as in fit_shaped_amplitudes (modes/damped_mode.cpp), with the shape's Gram
/// sums g (gram_sums). Returns the energy the mode explains (theta . rhs) and sets amp.
double fit_one(const attack_gram_memo::sums& g, std::complex<double> acc, std::complex<double>& amp) {
    const std::complex<double> s_pq = g.s_pq;
    const double s_pcq = g.s_pcq;
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

/// From q[n] = x[n] exp(i omega n) in demod (count values, add_mode's with demod), the prefix sums
/// of n q[n] into ramp_sum[0 .. ramp_count] (the longest linear attack asked for; ramp_sum[0] = 0
/// kept) and the suffix sums t[T] = q[T] + exp(rho) t[T + 1] into tail_sum (count + 1).
/// The values are std::complex's sums and products (ramp_sum[n] + n q[n], q[n] + exp(rho) t[n + 1]),
/// each complex as two doubles side by side (a GCC/Clang vector: the real and imaginary parts'
/// products and sums, the same bits).
void projection_sums(std::span<const std::complex<double>> demod, double rho, std::size_t ramp_count,
                     std::vector<std::complex<double>>& ramp_sum, std::vector<std::complex<double>>& tail_sum) {
    const std::size_t count = demod.size();
    assert(ramp_count <= count && ramp_sum.size() > ramp_count && tail_sum.size() > count);
    const auto* q = reinterpret_cast<const char*>(demod.data());  // NOLINT(cppcoreguidelines-pro-type-reinterpret-cast): std::complex's array layout
    auto* ramp = reinterpret_cast<char*>(ramp_sum.data());        // NOLINT(cppcoreguidelines-pro-type-reinterpret-cast): the same
    auto* tail = reinterpret_cast<char*>(tail_sum.data());        // NOLINT(cppcoreguidelines-pro-type-reinterpret-cast): the same
    constexpr std::size_t bytes = sizeof(two_lanes);
    static_assert(sizeof(std::complex<double>) == bytes);
    two_lanes acc, qn;
    std::memcpy(&acc, ramp, bytes);
    for (std::size_t n = 0; n < ramp_count; ++n) {
        std::memcpy(&qn, q + n * bytes, bytes);
        acc = acc + static_cast<double>(n) * qn;
        std::memcpy(ramp + (n + 1) * bytes, &acc, bytes);
    }
    const double step = std::exp(rho);
    two_lanes t{};
    std::memcpy(tail + count * bytes, &t, bytes);
    for (std::size_t n = count; n-- > 0;) {
        std::memcpy(&qn, q + n * bytes, bytes);
        t = qn + step * t;
        std::memcpy(tail + n * bytes, &t, bytes);
    }
}

/// Shapes of rises evaluated side by side (rising_projections).
constexpr std::size_t rise_lanes = 4;

/// acc_l += sum_{n in [begin, end)} v_l[n] q[n] for the lanes l < rise_lanes, v_l[n] = scale_l
/// exp(rho_l (n - begin)) anchored from the exact power every 512 samples and stepped by
/// exp(rho_l) between (q: re, im pairs): one piece of several rises whose pieces share their
/// knots, each lane the products and sums in the order of one piece summed alone.
WANE_KERNEL_CLONES
void add_piece_sums(const double* __restrict q, std::size_t begin, std::size_t end, const double* __restrict scale,
                    const double* __restrict rho, double* __restrict acc_re, double* __restrict acc_im) {
    constexpr std::size_t block = 512;
    std::array<double, rise_lanes> ratio{}, v{}, sum_re{}, sum_im{};
    for (std::size_t l = 0; l < rise_lanes; ++l) ratio[l] = std::exp(rho[l]), sum_re[l] = acc_re[l], sum_im[l] = acc_im[l];
    for (std::size_t from = begin; from < end; from += block) {
        for (std::size_t l = 0; l < rise_lanes; ++l) v[l] = scale[l] * std::exp(rho[l] * static_cast<double>(from - begin));
        const std::size_t to = std::min(end, from + block);
        for (std::size_t n = from; n < to; ++n) {
            const double qr = q[2 * n], qi = q[2 * n + 1];
            for (std::size_t l = 0; l < rise_lanes; ++l) {
                sum_re[l] += v[l] * qr;
                sum_im[l] += v[l] * qi;
                v[l] *= ratio[l];
            }
        }
    }
    for (std::size_t l = 0; l < rise_lanes; ++l) acc_re[l] = sum_re[l], acc_im[l] = sum_im[l];
}

/// sum_n a_l[n] q[n] for up to rise_lanes rises' shapes a_l over the same `rise` samples
/// (attack_shape with one rise_n: pieces over [0, rise) at the same knots, then exp(rho (n -
/// rise)) from rise on), q = demod: the rises' pieces sample by sample (as shape_samples makes
/// them), side by side, the decay from tail_sum[rise] (projection_sums).
void rising_projections(std::span<const mode_shape> shapes, std::size_t rise, std::span<const std::complex<double>> demod,
                        std::span<const std::complex<double>> tail_sum, std::span<std::complex<double>> out) {
    assert(!shapes.empty() && shapes.size() <= rise_lanes && out.size() == shapes.size());
    std::array<double, rise_lanes> scale{}, rho{}, acc_re{}, acc_im{};
    const double* q = reinterpret_cast<const double*>(demod.data());  // NOLINT(cppcoreguidelines-pro-type-reinterpret-cast): std::complex's array layout
    for (std::size_t k = 0; k < shapes.front().size(); ++k) {
        const shape_piece& p = shapes.front()[k];
        if (p.start >= rise) break;
        for (std::size_t l = 0; l < shapes.size(); ++l) {
            const shape_piece& lp = shapes[l][k];
            assert(lp.power == 0 && lp.start == p.start && lp.count == p.count);
            scale[l] = lp.scale, rho[l] = lp.rho;
        }
        add_piece_sums(q, p.start, std::min(rise, p.start + p.count), scale.data(), rho.data(), acc_re.data(), acc_im.data());
    }
    for (std::size_t l = 0; l < shapes.size(); ++l) out[l] = std::complex<double>{acc_re[l], acc_im[l]} + tail_sum[rise];
}

/// sum_n a[n] q[n] for one rise's shape a (rising_projections with one lane).
std::complex<double> rising_projection(const mode_shape& shape, std::size_t rise,
                                       std::span<const std::complex<double>> demod,
                                       std::span<const std::complex<double>> tail_sum) {
    std::complex<double> acc;
    rising_projections(std::span(&shape, 1), rise, demod, tail_sum, std::span(&acc, 1));
    return acc;
}

/// What the rises of one partial are searched on (choose_attacks): the mode's angular frequency
/// and decay per sample, the span's samples, the residual demodulated at the mode's frequency and
/// its decaying suffix sums (projection_sums).
struct rise_search {
    double omega = 0.0;
    double rho = 0.0;
    std::size_t count = 0;
    std::span<const std::complex<double>> demod;
    std::span<const std::complex<double>> tail_sum;
    attack_gram_memo* memo = nullptr;
};

/// Tries the instant starts at each of start_ratios (in that order; all positive) that rise over
/// n_rise samples, all but `current`: one that explains more than best becomes best and best_c
/// (the first of equals kept). The rises' projections rise_lanes at a time (rising_projections).
void consider_rises(const rise_search& s, std::size_t n_rise, std::span<const double> start_ratios,
                    const attack_choice& current, double& best, attack_choice& best_c) {
    std::array<mode_shape, rise_lanes> shapes;
    std::array<std::complex<double>, rise_lanes> acc{};
    for (std::size_t first = 0; first < start_ratios.size(); first += rise_lanes) {
        const std::size_t lanes = std::min(rise_lanes, start_ratios.size() - first);
        for (std::size_t l = 0; l < lanes; ++l) {
            assert(start_ratios[first + l] > 0.0);
            shapes[l] = attack_shape({.rise_n = n_rise, .start_ratio = start_ratios[first + l]}, s.rho, s.count);
        }
        rising_projections(std::span(shapes).first(lanes), std::min(n_rise, s.count), s.demod, s.tail_sum,
                           std::span(acc).first(lanes));
        for (std::size_t l = 0; l < lanes; ++l) {
            const attack_choice c{.rise_n = n_rise, .start_ratio = start_ratios[first + l]};
            if (c == current) continue;
            std::complex<double> amp;
            const double e = fit_one(gram_sums_of(c, s.omega, s.rho, s.count, s.memo), acc[l], amp);
            if (e > best) best = e, best_c = c;
        }
    }
}

/// The linear attack lengths of the grid (samples), those in (0, count).
std::vector<std::size_t> linear_attacks(const onset_attack_params& params, double sample_rate_hz, std::size_t count) {
    std::vector<std::size_t> out;
    for (const double t : params.attack_grid_s) {
        const auto n_attack = static_cast<std::size_t>(std::llround(t * sample_rate_hz));
        if (n_attack > 0 && n_attack < count) out.push_back(n_attack);
    }
    return out;
}

/// The modes of may_rise searched (with their energy over the span), the strongest first: at most
/// max_partials, those within range_db of the strongest. may_rise not empty.
std::vector<std::pair<double, std::size_t>> searched_order(std::span<const double> energy, std::span<const std::size_t> may_rise,
                                                          const onset_attack_params& params) {
    std::vector<std::pair<double, std::size_t>> order;
    for (const std::size_t i : may_rise) order.emplace_back(energy[i], i);
    std::sort(order.begin(), order.end(), std::greater<>());
    const double floor_energy = order.front().first * std::pow(10.0, -params.range_db / 10.0);
    std::size_t searched = 0;
    while (searched < order.size() && searched < params.max_partials && !(order[searched].first < floor_energy)) ++searched;
    order.resize(searched);
    return order;
}

}  // namespace

std::vector<double> joint_residual(std::span<const float> target, double sample_rate_hz,
                                   std::span<const damped_mode> modes, std::span<const mode_shape> shapes) {
    assert(shapes.size() == modes.size());
    std::vector<double> residual(target.begin(), target.end());
    subtract_fitted_modes(residual, sample_rate_hz, modes, shapes);
    return residual;
}

std::vector<attack_choice> choose_attacks(std::span<const float> target, double sample_rate_hz,
                                          std::span<const damped_mode> modes, std::span<const mode_shape> shapes,
                                          std::span<const double> energy, std::span<const std::size_t> may_rise,
                                          std::span<const std::size_t> may_swell, std::span<const attack_choice> current,
                                          const onset_attack_params& params, std::span<const double> joint,
                                          attack_gram_memo* memo) {
    assert(shapes.size() == modes.size() && current.size() == modes.size() && energy.size() == modes.size());
    assert(joint.empty() || joint.size() == target.size());
    const std::size_t count = target.size();
    std::vector<attack_choice> chosen(current.begin(), current.end());
    const double signal = energy_of(target);
    if (count == 0 || signal <= 0.0 || may_rise.empty()) return chosen;
    // The residual of the joint fit, then each searched mode refitted alone on it plus its own part.
    std::vector<double> residual = joint.empty() ? joint_residual(target, sample_rate_hz, modes, shapes)
                                                 : std::vector<double>(joint.begin(), joint.end());
    std::array<std::vector<double>, 2> scratch;
    const std::vector<std::pair<double, std::size_t>> order = searched_order(energy, may_rise, params);
    std::vector<std::complex<double>> demod(count), ramp_sum(count + 1), tail_sum(count + 1);
    // The linear attacks tried (below): their lengths bound the prefix sums needed.
    const std::vector<std::size_t> attack_ns = linear_attacks(params, sample_rate_hz, count);
    const std::size_t longest_attack = attack_ns.empty() ? 0 : *std::max_element(attack_ns.begin(), attack_ns.end());
    for (std::size_t r = 0; r < order.size(); ++r) {
        const std::size_t i = order[r].second;
        if (r == 0) add_mode_part(modes[i], shapes[i], sample_rate_hz, 1.0, residual, scratch[0], &demod);  // and q[n] below (later: swap_mode_parts)
        // With q[n] = residual[n] exp(i omega n), the projection on the rise over T samples then
        // exp(rho (n - T)) is  (1/T) sum_{n<T} n q[n] + t[T],  t[T] = sum_{n>=T} q[n] exp(rho (n - T)):
        // prefix sums of n q[n] and the suffix recursion t[T] = q[T] + exp(rho) t[T + 1] give
        // every T at once, in O(count).
        const double omega = two_pi * modes[i].freq_hz / sample_rate_hz;
        const double rho = -modes[i].decay_per_s / sample_rate_hz;
        const attack_choice& now = chosen[i];
        const std::size_t now_linear = now.start_ratio > 0.0 ? 0 : std::min(now.rise_n, count);
        const std::size_t ramp_n = std::max(longest_attack, now_linear);
        projection_sums(demod, rho, ramp_n, ramp_sum, tail_sum);
        // An instant start that rises: its projection sum a[n] q[n] directly, O(count) per choice.
        const auto explained = [&](const attack_choice& c, std::complex<double>& amp) {
            std::complex<double> acc;
            if (c.start_ratio > 0.0 && c.rise_n > 0) {
                acc = rising_projection(attack_shape(c, rho, count), std::min(c.rise_n, count), demod, tail_sum);
            } else {
                assert(c.rise_n <= ramp_n);
                acc = (c.rise_n == 0 ? std::complex<double>{} : ramp_sum[c.rise_n] / static_cast<double>(c.rise_n)) +
                      tail_sum[c.rise_n];
            }
            return fit_one(gram_sums_of(c, omega, rho, count, memo), acc, amp);
        };
        // The current choice first: another must explain min_gain_share of the signal more.
        std::complex<double> amp;
        const double kept = explained(chosen[i], amp);
        double best = kept;
        attack_choice best_c = chosen[i];
        const auto consider = [&](const attack_choice& c) {
            if (c == chosen[i]) return;
            std::complex<double> a;
            const double e = explained(c, a);
            if (e > best) best = e, best_c = c;
        };
        consider({});
        for (const std::size_t n_attack : attack_ns) consider({.rise_n = n_attack});
        if (best > kept + params.min_gain_share * signal) chosen[i] = best_c;
        // An instant start that rises must do better still than the plain choice it replaces
        // (the simpler envelope wins a near tie).
        if (r < params.max_rising_partials && std::find(may_swell.begin(), may_swell.end(), i) != may_swell.end()) {
            const double plain = std::max(best, kept);
            best = plain;
            const attack_choice plain_c = chosen[i];
            for (const double t : params.rise_grid_s) {
                const auto n_rise = static_cast<std::size_t>(std::llround(t * sample_rate_hz));
                if (n_rise < static_cast<std::size_t>(rise_segments) || n_rise >= count) continue;
                const rise_search search{.omega = omega, .rho = rho, .count = count, .demod = demod, .tail_sum = tail_sum, .memo = memo};
                consider_rises(search, n_rise, params.start_ratios, chosen[i], best, best_c);
            }
            if (!(best_c == plain_c) && best > plain + params.min_gain_share * signal) chosen[i] = best_c;
        }
        if (r + 1 == order.size()) break;  // the residual is for the partials after this one
        damped_mode refit = modes[i];
        explained(chosen[i], refit.amp);
        swap_mode_parts(refit, attack_shape(chosen[i], rho, count), modes[order[r + 1].second], shapes[order[r + 1].second], sample_rate_hz,
                        residual, scratch, demod);  // this one's refit off, the next one's own part back, and its q[n]
    }
    return chosen;
}

}  // namespace wane

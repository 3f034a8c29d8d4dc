#include "modes/mode_shape.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>

#include "modes/damped_mode.hpp"

namespace wane {

mode_shape exponential_shape(double rho, std::size_t count) {
    return {{.start = 0, .count = count, .scale = 1.0, .rho = rho, .power = 0}};
}

mode_shape envelope_shape(const envelope& env, double sample_rate_hz, std::size_t count) {
    assert(sample_rate_hz > 0.0);
    mode_shape out;
    const double peak_amp = to_amp(env.peak).lin;
    // The attack: n / fs < attack_s, amplitude peak * (n / fs) / attack_s.
    const auto attack_n = std::min(count, static_cast<std::size_t>(std::max(0.0, std::ceil(env.attack_s * sample_rate_hz))));
    if (attack_n > 0)
        out.push_back({.start = 0, .count = attack_n, .scale = peak_amp / (env.attack_s * sample_rate_hz), .rho = 0.0, .power = 1});
    for (const envelope_piece& piece : envelope_pieces(env)) {
        const auto first = std::max(attack_n, static_cast<std::size_t>(std::max(0.0, std::ceil(piece.start_s * sample_rate_hz))));
        const double end_n = std::min(static_cast<double>(count), std::ceil(piece.end_s * sample_rate_hz));
        if (!(end_n > static_cast<double>(first))) continue;
        const double t0 = static_cast<double>(first) / sample_rate_hz;
        const double level0 = piece.start_level.db + piece.slope_db_per_s * (t0 - piece.start_s);
        // level in dB falls by slope / fs per sample: amplitude ratio exp(slope / fs / db_per_neper).
        out.push_back({.start = first, .count = static_cast<std::size_t>(end_n) - first,
                       .scale = to_amp(level_db{level0}).lin,
                       .rho = piece.slope_db_per_s / (sample_rate_hz * db_per_neper), .power = 0});
    }
    return out;
}

std::complex<double> moment_geometric_sum(int power, std::complex<double> mu, double count) {
    assert(power >= 0 && power <= 2);
    // exp(m mu) is the same for mu + i 2 pi k at integer m.
    mu = {mu.real(), std::remainder(mu.imag(), two_pi)};
    const double n = count;
    if (std::abs(mu) * n < 1e-3) {
        // sum_k mu^k / k! S_{power + k}, k = 0 .. 3, with the power sums S_p = sum_{m<n} m^p
        // (N = n - 1); the next term is below (n |mu|)^4 / 24 of the sum.
        const double big_n = n - 1.0;
        const double s1 = big_n * (big_n + 1.0) / 2.0;
        const double s2 = big_n * (big_n + 1.0) * (2.0 * big_n + 1.0) / 6.0;
        const std::array<double, 6> s{n, s1, s2, s1 * s1,
                                      s2 * (3.0 * big_n * big_n + 3.0 * big_n - 1.0) / 5.0,
                                      s1 * s1 * (2.0 * big_n * big_n + 2.0 * big_n - 1.0) / 3.0};
        const auto p = static_cast<std::size_t>(power);
        return s[p] + mu * (s[p + 1] + mu * (s[p + 2] / 2.0 + mu * s[p + 3] / 6.0));
    }
    // With E = exp(mu), (E - 1) sum m^p E^m telescopes (shift m by one):
    //   H = sum m E^m = ((n - 1) E^n - G + 1) / (E - 1),
    //   Q = sum m^2 E^m = ((n - 1)^2 E^n - 2 H + G - 1) / (E - 1),   G = geometric_sum.
    const std::complex<double> g = geometric_sum(mu, n);
    if (power == 0) return g;
    const std::complex<double> em1 = complex_expm1(mu);
    const std::complex<double> e_n = complex_expm1(n * mu) + 1.0;
    const std::complex<double> h = ((n - 1.0) * e_n - g + 1.0) / em1;
    if (power == 1) return h;
    return ((n - 1.0) * (n - 1.0) * e_n - 2.0 * h + g - 1.0) / em1;
}

namespace {

/// sum over n in [start, start + count) of scale n^power exp(rho (n - start)) exp(lambda n).
std::complex<double> piece_sum(const shape_piece& p, std::complex<double> lambda) {
    if (p.count == 0) return {};
    const auto s = static_cast<double>(p.start);
    const auto len = static_cast<double>(p.count);
    const std::complex<double> mu = p.rho + lambda;
    // exp(lambda start) with the imaginary part folded (an integer start).
    const std::complex<double> at_start =
        p.start == 0 ? std::complex<double>{1.0, 0.0}
                     : std::exp(std::complex<double>{lambda.real() * s, std::remainder(lambda.imag() * s, two_pi)});
    // sum_m (s + m)^p exp(mu m), expanded in powers of m.
    const std::complex<double> g = moment_geometric_sum(0, mu, len);
    if (p.power == 0) return p.scale * at_start * g;
    const std::complex<double> h = moment_geometric_sum(1, mu, len);
    if (p.power == 1) return p.scale * at_start * (s * g + h);
    return p.scale * at_start * (s * s * g + 2.0 * s * h + moment_geometric_sum(2, mu, len));
}

}  // namespace

std::complex<double> shape_pair_sum(const mode_shape& a, const mode_shape& b, std::complex<double> lambda) {
    std::complex<double> total{};
    for (const shape_piece& pa : a) {
        for (const shape_piece& pb : b) {
            const std::size_t lo = std::max(pa.start, pb.start);
            const std::size_t hi = std::min(pa.start + pa.count, pb.start + pb.count);
            if (hi <= lo) continue;
            // The product on [lo, hi): scale_a scale_b exp(rho_a (lo - start_a) + rho_b (lo - start_b))
            // n^(pa + pb) exp((rho_a + rho_b)(n - lo)).
            const double shift = pa.rho * static_cast<double>(lo - pa.start) + pb.rho * static_cast<double>(lo - pb.start);
            const shape_piece prod{.start = lo, .count = hi - lo, .scale = pa.scale * pb.scale * std::exp(shift),
                                   .rho = pa.rho + pb.rho, .power = pa.power + pb.power};
            total += piece_sum(prod, lambda);
        }
    }
    return total;
}

void shape_samples(const mode_shape& a, std::size_t count, std::vector<double>& out) {
    // Pieces in order without overlap (as every shape made here): only the samples between and
    // after them are zeroed; otherwise all of them first.
    const bool in_order = std::adjacent_find(a.begin(), a.end(), [](const shape_piece& p, const shape_piece& q) {
                              return q.start < p.start + p.count;
                          }) == a.end();
    if (!in_order) out.assign(count, 0.0);
    out.resize(count);
    std::size_t zero_from = 0;  // (in order) the first sample no piece before has written
    for (const shape_piece& p : a) {
        if (in_order) std::fill(out.begin() + static_cast<std::ptrdiff_t>(std::min(zero_from, count)),
                                out.begin() + static_cast<std::ptrdiff_t>(std::min(p.start, count)), 0.0);
        zero_from = std::max(zero_from, p.start + p.count);
        assert(p.power == 0 || p.power == 1);
        const std::size_t end = std::min(count, p.start + p.count);
        const double ratio = std::exp(p.rho);
        double v = p.scale;
        for (std::size_t n = p.start; n < end; ++n) {
            if ((n - p.start) % 512 == 0) v = p.scale * std::exp(p.rho * static_cast<double>(n - p.start));
            out[n] = p.power == 0 ? v : v * static_cast<double>(n);
            v *= ratio;
        }
    }
    if (in_order) std::fill(out.begin() + static_cast<std::ptrdiff_t>(std::min(zero_from, count)), out.end(), 0.0);
}

}  // namespace wane

#include "analysis/beating_pairs.hpp"

#include <algorithm>
#include <cmath>
#include <complex>
#include <vector>

#include <Eigen/Dense>

#include "core/units.hpp"
#include "modes/esprit.hpp"
#include "modes/narrowband.hpp"

namespace wane {

namespace {

struct band_fit {
    std::vector<std::complex<double>> poles;
    std::vector<std::complex<double>> amps;  ///< at sample 0 of the band (the onset)
    double residual = 0.0;
};

/// Complex least squares of y[m], m in [first, first + seg.size()), on the given poles.
band_fit fit_band(std::span<const std::complex<double>> seg, std::size_t first, std::vector<std::complex<double>> poles) {
    band_fit out{.poles = std::move(poles), .amps = {}, .residual = 0.0};
    const auto rows = static_cast<Eigen::Index>(seg.size());
    const auto cols = static_cast<Eigen::Index>(out.poles.size());
    Eigen::MatrixXcd a(rows, cols);
    Eigen::VectorXcd b(rows);
    for (Eigen::Index m = 0; m < rows; ++m) {
        b(m) = seg[static_cast<std::size_t>(m)];
        for (Eigen::Index k = 0; k < cols; ++k)
            a(m, k) = std::pow(out.poles[static_cast<std::size_t>(k)], static_cast<double>(first) + static_cast<double>(m));
    }
    const Eigen::VectorXcd c = a.colPivHouseholderQr().solve(b);
    out.residual = (b - a * c).squaredNorm();
    out.amps.assign(c.data(), c.data() + cols);
    return out;
}

}  // namespace

int split_beating_pairs(patch& p, std::span<const float> note, double sample_rate_hz,
                        const beating_pair_params& params) {
    if (note.empty() || p.partials.empty()) return 0;
    const note_spectrum spectrum(note, sample_rate_hz);
    double strongest = -infinity;
    for (const partial& q : p.partials) strongest = std::max(strongest, q.env.peak.db);
    std::vector<partial> out;
    out.reserve(p.partials.size() + 8);
    std::vector<partial> appended;
    int splits = 0;
    for (std::size_t k = 0; k < p.partials.size(); ++k) {
        const partial& q = p.partials[k];
        out.push_back(q);
        if (q.env.peak.db < strongest - params.keep_within_db) continue;
        // A partial with a neighbour inside its band is already resolved.
        const bool crowded = std::any_of(p.partials.begin(), p.partials.end(), [&](const partial& o) {
            return &o != &q && std::abs(o.freq_hz - q.freq_hz) < 2.0 * params.half_width_hz;
        });
        if (crowded) continue;
        const narrowband nb = spectrum.band(q.freq_hz, params.half_width_hz, params.min_rate_hz);
        if (nb.y.empty()) continue;
        const double settle_s = 1.0 / params.half_width_hz;
        const auto first = static_cast<std::size_t>(std::ceil((params.skip_start_s + settle_s) * nb.sample_rate_hz));
        const double end_s = spectrum.duration_s() - settle_s;
        const auto last = static_cast<std::size_t>(std::floor(end_s * nb.sample_rate_hz));
        if (last <= first || static_cast<double>(last - first) < params.min_span_s * nb.sample_rate_hz) continue;
        const std::span<const std::complex<double>> seg(nb.y.data() + first, last - first);
        const auto one = esprit_poles(seg, {.dimension = 12, .max_order = 1, .fixed_order = 1});
        const auto two = esprit_poles(seg, {.dimension = 12, .max_order = 2, .fixed_order = 2});
        if (one.size() != 1 || two.size() != 2) continue;
        const band_fit f1 = fit_band(seg, first, one);
        const band_fit f2 = fit_band(seg, first, two);
        const auto m = static_cast<double>(seg.size());
        if (!(f2.residual > 0.0) || !(f1.residual > f2.residual)) continue;
        const double gain_db = power_to_db(f1.residual / f2.residual);
        // BIC: 2 m ln(r1 / r2) (complex samples: two real values each) against 4 more real
        // parameters (a frequency, a decay and a complex amplitude) times ln(2 m).
        const double bic_gain = 2.0 * m * std::log(f1.residual / f2.residual);
        if (gain_db < params.min_gain_db || bic_gain < params.bic_factor * 4.0 * std::log(2.0 * m)) continue;
        // Both modes inside the flat part of the band, apart, not growing, neither negligible.
        std::vector<double> freq(2), decay(2), amp(2);
        bool ok = true;
        for (std::size_t i = 0; i < 2; ++i) {
            const double offset = std::arg(f2.poles[i]) * nb.sample_rate_hz / two_pi;
            freq[i] = nb.centre_hz + offset;
            decay[i] = -std::log(std::abs(f2.poles[i])) * nb.sample_rate_hz;
            amp[i] = 2.0 * std::abs(f2.amps[i]);
            ok = ok && std::abs(nb.centre_hz - q.freq_hz + offset) < 0.5 * params.half_width_hz && decay[i] > -0.01;
        }
        const double weaker_db = to_level(amp_lin{std::min(amp[0], amp[1]) / std::max(amp[0], amp[1])}).db;
        if (!ok || std::abs(freq[0] - freq[1]) < params.min_separation_hz || weaker_db < -params.max_weaker_db) continue;
        // A pair keeps the partial's long-term frequency: its power-weighted mean frequency stays
        // within centroid_tolerance of the separation from it. A pitch glide fitted by two poles
        // (a strong one at the early pitch) does not, and stays one partial.
        const double power0 = amp[0] * amp[0], power1 = amp[1] * amp[1];
        const double centroid = (power0 * freq[0] + power1 * freq[1]) / (power0 + power1);
        if (std::abs(centroid - q.freq_hz) > params.centroid_tolerance * std::abs(freq[0] - freq[1])) continue;
        // The stronger member takes the partial's place; the weaker is appended after all
        // partials, so every partial fitted from a track keeps its index.
        const std::size_t strong = amp[0] >= amp[1] ? 0 : 1;
        for (std::size_t i : {strong, 1 - strong}) {
            const double t60 = decay[i] > 1e-6 ? ln1000 / decay[i] : infinity;
            partial member{.freq_hz = freq[i], .harmonic = q.harmonic, .phase_rad = std::arg(f2.amps[i]),
                           .env = {.attack_s = 0.0, .peak = to_level(amp_lin{amp[i]}),
                                   .decay = {{.t60_s = t60, .until_s = std::nullopt}}},
                           .place = q.place};
            if (i == strong) out.back() = member;
            else appended.push_back(member);
        }
        ++splits;
    }
    out.insert(out.end(), appended.begin(), appended.end());
    p.partials = std::move(out);
    return splits;
}

}  // namespace wane

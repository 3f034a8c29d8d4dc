#include "analysis/mode_split.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <complex>
#include <numeric>
#include <optional>
#include <vector>

#include "core/units.hpp"
#include "modes/damped_mode.hpp"
#include "modes/esprit.hpp"
#include "synthesis/render.hpp"

namespace wane {

namespace {

using cvec = std::vector<std::complex<double>>;

/// The span of the partials' long spectrum (analysis/heard_peaks.hpp), seconds from the onset.
constexpr double heard_from_s = 0.1;
constexpr double heard_to_s = 1.1;

/// The partials `which` of p (noise left out) rendered at sample_rate_hz over frames samples.
std::vector<float> render_some(const patch& p, std::span<const std::size_t> which, double sample_rate_hz,
                               std::size_t frames) {
    patch q{.version = p.version, .note = p.note, .source = p.source, .partials = {}, .noise = {}};
    for (std::size_t k : which) q.partials.push_back(p.partials[k]);
    return render_patch(q, {.sample_rate_hz = sample_rate_hz, .length_s = static_cast<double>(frames) / sample_rate_hz,
                            .include_noise = false});
}

/// One running mean of d samples (causal): out[n] = (1/d) sum_{j < d, j <= n} in[n - j]; out is
/// in's size (the caller's buffer, so three passes allocate once).
void running_mean(const cvec& in, cvec& out, std::size_t d) {
    std::complex<double> sum{};
    for (std::size_t n = 0; n < in.size(); ++n) {
        sum += in[n];
        if (n >= d) sum -= in[n - d];
        out[n] = sum / static_cast<double>(d);
    }
}

/// The band of x around freq_hz (header): x moved to 0 Hz, three running means of d samples,
/// sampled every d samples from the first output whose means lie wholly inside x (sample 3 (d - 1)),
/// so band sample m covers x[m d, m d + 3 d - 2] and a mode c z^n reads c' (z^d)^m.
cvec band_of(std::span<const float> x, double freq_hz, double sample_rate_hz, std::size_t d) {
    cvec v(x.size());
    const std::complex<double> step = std::polar(1.0, -two_pi * freq_hz / sample_rate_hz);
    std::complex<double> rot{1.0, 0.0};
    for (std::size_t n = 0; n < x.size(); ++n) {
        v[n] = static_cast<double>(x[n]) * rot;
        rot *= step;
        if ((n & 1023U) == 1023U) rot = std::polar(1.0, -two_pi * freq_hz * static_cast<double>(n + 1) / sample_rate_hz);
    }
    cvec other(v.size());
    for (int pass = 0; pass < 3; ++pass) {
        running_mean(v, other, d);
        v.swap(other);
    }
    cvec out;
    for (std::size_t n = 3 * (d - 1); n < v.size(); n += d) out.push_back(v[n]);
    return out;
}

/// sum_k Re(amp_k z_k^n), n < frames (double recursion, re-anchored every 1024 samples).
std::vector<float> mode_signal(std::span<const damped_mode> modes, double sample_rate_hz, std::size_t frames) {
    std::vector<double> acc(frames, 0.0);
    for (const damped_mode& m : modes) {
        const std::complex<double> a{-m.decay_per_s / sample_rate_hz, two_pi * m.freq_hz / sample_rate_hz};
        const std::complex<double> z = std::exp(a);
        std::complex<double> w = m.amp;
        for (std::size_t n = 0; n < frames; ++n) {
            if ((n & 1023U) == 0U) w = m.amp * std::exp(a * static_cast<double>(n));
            acc[n] += w.real();
            w *= z;
        }
    }
    return {acc.begin(), acc.end()};
}

double energy(std::span<const float> x, std::size_t count) {
    double e = 0.0;
    for (std::size_t n = 0; n < std::min(count, x.size()); ++n) e += double(x[n]) * double(x[n]);
    return e;
}

double residual_energy(std::span<const float> a, std::span<const float> b, std::size_t count) {
    double e = 0.0;
    for (std::size_t n = 0; n < std::min({count, a.size(), b.size()}); ++n) {
        const double r = double(a[n]) - double(b[n]);
        e += r * r;
    }
    return e;
}

/// Mean |dB| difference of the band's block levels, candidate against recording, over the blocks
/// from late_from_s on while the recording's stays within late_range_db of its loudest block.
double late_error_db(const cvec& rec, const cvec& cand, double band_rate_hz, const mode_split_params& params) {
    const auto per_block = std::max<std::size_t>(1, static_cast<std::size_t>(std::lround(params.late_block_s * band_rate_hz)));
    const std::size_t blocks = std::min(rec.size(), cand.size()) / per_block;
    std::vector<double> r(blocks), c(blocks);
    for (std::size_t b = 0; b < blocks; ++b) {
        for (std::size_t j = 0; j < per_block; ++j) {
            r[b] += std::norm(rec[b * per_block + j]);
            c[b] += std::norm(cand[b * per_block + j]);
        }
    }
    const double top = blocks > 0 ? *std::max_element(r.begin(), r.end()) : 0.0;
    double sum = 0.0;
    int count = 0;
    for (std::size_t b = 0; b < blocks; ++b) {
        if (static_cast<double>(b * per_block) / band_rate_hz < params.late_from_s) continue;
        if (!(r[b] > 0.0) || power_to_db(r[b] / top) < -params.late_range_db) break;
        sum += std::abs(power_to_db(std::max(c[b], 1e-300) / r[b]));
        ++count;
    }
    return count > 0 ? sum / count : 0.0;
}

struct mode_set {
    std::vector<damped_mode> modes;
    double band_rss = 0.0;  ///< residual energy of the band (band samples from the settling on)
    cvec band;              ///< the modes' band
};

/// The band of a sum of modes as band_of gives it, exactly: a mode Re(amp z^n) leaves amp / 2 w^n
/// at 0 Hz (w = z exp(-i 2 pi f_c / fs); the image at -2 f_c is filtered out), and the three running
/// means of d samples multiply it by H(w) = ((1/d) sum_{j < d} w^-j)^3 once n >= 3 (d - 1).
cvec band_of_modes(std::span<const damped_mode> modes, double centre_hz, double sample_rate_hz, std::size_t d,
                   std::size_t count) {
    cvec out(count);
    for (const damped_mode& m : modes) {
        const std::complex<double> a{-m.decay_per_s / sample_rate_hz, two_pi * (m.freq_hz - centre_hz) / sample_rate_hz};
        const std::complex<double> mean = geometric_sum(-a, static_cast<double>(d)) / static_cast<double>(d);
        const std::complex<double> h = mean * mean * mean;
        for (std::size_t i = 0; i < count; ++i) {
            const double n = static_cast<double>(i * d + 3 * (d - 1));
            out[i] += 0.5 * m.amp * h * std::exp(a * n);
        }
    }
    return out;
}

double band_residual(const cvec& band, const cvec& model, std::size_t settle) {
    double e = 0.0;
    for (std::size_t i = settle; i < std::min(band.size(), model.size()); ++i) e += std::norm(band[i] - model[i]);
    return e;
}

/// The modes of order `order` from the band's poles, their amplitudes fitted on target at the full
/// rate; empty when a pole lies out of range or grows, two lie closer than min_separation_hz, a
/// mode is louder than tame_amp, or the mode heard most over 0.1-1.1 s moved (header).
std::optional<mode_set> fit_order(const cvec& band, std::size_t settle, double freq_hz, std::size_t d,
                                  std::span<const float> target, double sample_rate_hz, int order, double tame_amp,
                                  const mode_split_params& params) {
    if (band.size() <= settle) return std::nullopt;
    const double band_rate_hz = sample_rate_hz / static_cast<double>(d);
    const std::span<const std::complex<double>> seg(band.data() + settle, band.size() - settle);
    const auto poles = esprit_poles(seg, {.dimension = params.esprit_dimension, .max_order = order, .fixed_order = order});
    if (static_cast<int>(poles.size()) != order) return std::nullopt;
    mode_set out;
    constexpr double longest_t60_s = 60.0;  // a mode of a few seconds of recording: no drone
    for (const auto& z : poles) {
        const double offset_hz = std::arg(z) * band_rate_hz / two_pi;
        const double decay = -std::log(std::abs(z)) * band_rate_hz;
        if (std::abs(offset_hz) > params.max_offset_hz || !(decay > ln1000 / longest_t60_s)) return std::nullopt;
        out.modes.push_back({.freq_hz = freq_hz + offset_hz, .decay_per_s = decay, .amp = {}});
    }
    for (std::size_t i = 0; i < out.modes.size(); ++i)
        for (std::size_t j = 0; j < i; ++j)
            if (std::abs(out.modes[i].freq_hz - out.modes[j].freq_hz) < params.min_separation_hz) return std::nullopt;
    fit_mode_amplitudes(target, sample_rate_hz, out.modes);
    if (std::any_of(out.modes.begin(), out.modes.end(), [&](const damped_mode& m) { return !(std::abs(m.amp) <= tame_amp); }))
        return std::nullopt;
    // The mode heard most over the long spectrum's span (energy |amp|^2 of exp(-2 d t) over it)
    // stays where the partial was measured there.
    const auto heard = [&](const damped_mode& m) {
        return std::norm(m.amp) * (std::exp(-2.0 * m.decay_per_s * heard_from_s) - std::exp(-2.0 * m.decay_per_s * heard_to_s)) /
               m.decay_per_s;
    };
    const auto main = std::max_element(out.modes.begin(), out.modes.end(),
                                       [&](const damped_mode& a, const damped_mode& b) { return heard(a) < heard(b); });
    if (std::abs(1200.0 * std::log2(main->freq_hz / freq_hz)) > params.max_heard_shift_cents) return std::nullopt;
    // ... and stays the one peak there an octave down too: a mode closer than twice
    // min_separation_hz is heard at least min_heard_margin_db less.
    const double loudest_near = heard(*main) * to_amp(level_db{-params.min_heard_margin_db}).lin *
                                to_amp(level_db{-params.min_heard_margin_db}).lin;
    for (const damped_mode& m : out.modes)
        if (&m != &*main && std::abs(m.freq_hz - main->freq_hz) < 2.0 * params.min_separation_hz && heard(m) > loudest_near)
            return std::nullopt;
    out.band = band_of_modes(out.modes, freq_hz, sample_rate_hz, d, band.size());
    out.band_rss = band_residual(band, out.band, settle);
    return out;
}

/// The order with the least BIC over the band's samples (complex: two real values each; a mode is
/// four real parameters) among the orders fit_order accepts; empty when none does.
std::optional<mode_set> choose_modes(const cvec& band, double freq_hz, std::size_t d, std::span<const float> target,
                                     double sample_rate_hz, double tame_amp, const mode_split_params& params) {
    constexpr std::size_t settle = 3;  // the band's first samples, where the note's start sits
    const double count = 2.0 * static_cast<double>(band.size() > settle ? band.size() - settle : 0);
    std::optional<mode_set> best;
    double best_cost = infinity;
    for (int order = 1; order <= params.max_modes; ++order) {
        auto set = fit_order(band, settle, freq_hz, d, target, sample_rate_hz, order, tame_amp, params);
        if (!set || !(set->band_rss > 0.0)) continue;
        const double cost = count * std::log(set->band_rss) + params.bic_factor * 4.0 * order * std::log(count);
        if (cost < best_cost) best_cost = cost, best = std::move(set);
    }
    return best;
}

/// The modes as partials with an instant onset and one segment (gain: the render's note gain).
std::vector<partial> as_partials(std::span<const damped_mode> modes, const partial& was, double gain) {
    std::vector<partial> out;
    for (const damped_mode& m : modes)
        out.push_back({.freq_hz = m.freq_hz, .harmonic = was.harmonic, .phase_rad = std::arg(m.amp),
                       .env = {.attack_s = 0.0, .peak = to_level(amp_lin{std::abs(m.amp) / gain}),
                               .decay = {{.t60_s = ln1000 / m.decay_per_s, .until_s = std::nullopt}}},
                       .place = was.place});
    // The mode with the most energy first: it takes the partial's place.
    const auto energy_of = [](const partial& q) { return 2.0 * q.env.peak.db + 10.0 * std::log10(q.env.decay[0].t60_s); };
    std::stable_sort(out.begin(), out.end(), [&](const partial& a, const partial& b) { return energy_of(a) > energy_of(b); });
    return out;
}

/// The partials to try: the loudest, within params.within_db of the loudest, clear of 0 Hz and of
/// the band-limit fade by twice max_offset_hz, with no other partial within max_offset_hz (a twin
/// at its very frequency aside).
std::vector<std::size_t> candidates(const patch& p, double sample_rate_hz, const mode_split_params& params) {
    constexpr double same_freq_hz = 1e-6;  // the patch's frequency grid
    std::vector<std::size_t> order(p.partials.size());
    std::iota(order.begin(), order.end(), std::size_t{0});
    std::stable_sort(order.begin(), order.end(),
                     [&](std::size_t a, std::size_t b) { return p.partials[a].env.peak.db > p.partials[b].env.peak.db; });
    std::vector<std::size_t> out;
    if (order.empty()) return out;
    const double loudest = p.partials[order.front()].env.peak.db;
    const double margin_hz = 2.0 * params.max_offset_hz;
    for (std::size_t k : order) {
        const partial& q = p.partials[k];
        if (q.env.peak.db < loudest - params.within_db || static_cast<int>(out.size()) >= params.max_partials) break;
        // A partial with a neighbour within max_offset_hz is already resolved there (a pair); a
        // twin at the same frequency is the same sinusoid in another stage, not a neighbour.
        const bool crowded = std::any_of(p.partials.begin(), p.partials.end(), [&](const partial& o) {
            const double apart_hz = std::abs(o.freq_hz - q.freq_hz);
            return apart_hz > same_freq_hz && apart_hz < params.max_offset_hz;
        });
        // A gliding partial's phase is no sum of plain modes (core/glide.hpp): it stays.
        if (!crowded && q.glide_cents == 0.0 && q.freq_hz > margin_hz && q.freq_hz < band_fade_start_fraction * 0.5 * sample_rate_hz - margin_hz)
            out.push_back(k);
    }
    return out;
}

}  // namespace

mode_split_summary split_into_modes(patch& p, std::span<const float> note, double sample_rate_hz,
                                    const mode_split_params& params) {
    mode_split_summary summary;
    const std::size_t frames = note.size();
    if (p.partials.empty() || sample_rate_hz < min_render_rate_hz || sample_rate_hz > max_render_rate_hz ||
        static_cast<double>(frames) < params.min_span_s * sample_rate_hz)
        return summary;
    const auto d = static_cast<std::size_t>(std::max(1.0, std::floor(sample_rate_hz / params.band_rate_hz)));
    const auto early = static_cast<std::size_t>(params.early_s * sample_rate_hz);
    const double gain = to_amp(level_db{p.note.gain_db}).lin;
    const double min_gain = to_amp(level_db{params.min_gain_db}).lin;  // squared below: a power ratio
    std::vector<std::size_t> all(p.partials.size());
    std::iota(all.begin(), all.end(), std::size_t{0});
    std::vector<float> residual = render_some(p, all, sample_rate_hz, frames);
    for (std::size_t n = 0; n < frames; ++n) residual[n] = note[n] - residual[n];
    std::vector<partial> appended;
    std::vector<float> target(frames);
    for (std::size_t k : candidates(p, sample_rate_hz, params)) {
        const std::size_t one[] = {k};
        const std::vector<float> own = render_some(p, one, sample_rate_hz, frames);
        for (std::size_t n = 0; n < frames; ++n) target[n] = residual[n] + own[n];
        double loudest = 0.0;
        for (float v : own) loudest = std::max(loudest, std::abs(static_cast<double>(v)));
        const double freq_hz = p.partials[k].freq_hz;
        const cvec band = band_of(target, freq_hz, sample_rate_hz, d);
        const auto best = choose_modes(band, freq_hz, d, target, sample_rate_hz,
                                       loudest * to_amp(level_db{params.max_rise_db}).lin, params);
        if (!best) continue;
        const cvec own_band = band_of(own, freq_hz, sample_rate_hz, d);
        if (best->band_rss * min_gain * min_gain > band_residual(band, own_band, 3)) continue;
        const std::vector<float> early_modes = mode_signal(best->modes, sample_rate_hz, std::min(early, frames));
        if (residual_energy(target, early_modes, early) > energy(residual, early)) continue;
        const double late_now = late_error_db(band, own_band, sample_rate_hz / static_cast<double>(d), params);
        const double late_new = late_error_db(band, best->band, sample_rate_hz / static_cast<double>(d), params);
        if (late_new > late_now + params.late_tolerance_db) continue;
        const std::vector<float> modes = mode_signal(best->modes, sample_rate_hz, frames);
        for (std::size_t n = 0; n < frames; ++n) residual[n] = target[n] - modes[n];
        const std::vector<partial> members = as_partials(best->modes, p.partials[k], gain);
        p.partials[k] = members.front();
        appended.insert(appended.end(), members.begin() + 1, members.end());
        ++summary.split;
        summary.modes_added += static_cast<int>(members.size()) - 1;
    }
    p.partials.insert(p.partials.end(), appended.begin(), appended.end());
    return summary;
}

}  // namespace wane

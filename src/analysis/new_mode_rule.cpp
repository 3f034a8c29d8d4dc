#include "analysis/new_mode_rule.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <cstring>

#include "core/units.hpp"
#include "modes/mode_residual.hpp"
#include "modes/narrowband.hpp"
#include "spectrum/window.hpp"
#include "synthesis/kernel_clones.hpp"

namespace wane {

std::vector<damped_mode> new_mode_candidates(const patch& p, std::span<const damped_mode> found,
                                             const std::vector<bool>& taken, double cluster_hz,
                                             const onset_refine_params& params) {
    std::vector<damped_mode> out;
    for (std::size_t j = 0; j < found.size(); ++j) {
        const double d = found[j].decay_per_s;
        if (taken[j] || d <= 0.0 || ln1000 / d < params.min_new_t60_s || ln1000 / d > params.max_lasting_t60_s) continue;
        if (pi * found[j].freq_hz / d < params.min_new_q) continue;
        const bool near_partial = std::any_of(p.partials.begin(), p.partials.end(), [&](const partial& q) {
            return std::abs(q.freq_hz - found[j].freq_hz) < params.new_mode_clearance_cells * cluster_hz;
        });
        if (!near_partial) out.push_back(found[j]);
    }
    return out;
}

std::complex<double> windowed_amplitude(std::span<const float> note, double sample_rate_hz, const damped_mode& m,
                                        std::size_t first, std::span<const float> window) {
    const std::size_t count = window.size();
    assert(sample_rate_hz > 0.0 && first + count <= note.size() && count > 1);
    // conj(z)^n walked by one product a sample, exact every 256th.
    const std::complex<double> s{-m.decay_per_s, -two_pi * m.freq_hz};
    const std::complex<double> step = std::exp(s / sample_rate_hz);
    std::complex<double> along{}, z_n{};
    double weight = 0.0;
    for (std::size_t k = 0; k < count; ++k) {
        z_n = k % 256 == 0 ? std::exp(s * (static_cast<double>(first + k) / sample_rate_hz)) : z_n * step;
        along += double(window[k]) * double(note[first + k]) * z_n;
        weight += double(window[k]) * std::norm(z_n);
    }
    return weight > 0.0 ? 2.0 * along / weight : std::complex<double>{};
}

namespace {

/// Four doubles side by side (GCC/Clang vector extension): one AVX register, two SSE2 ones.
using lanes = double __attribute__((vector_size(32)));
constexpr std::size_t amplitude_lanes = 4;

/// windowed_amplitude's sums for four modes at once, lane l the arithmetic of mode l alone (the
/// products std::complex's multiplication and std::norm form, in their order): z walked by one
/// product a sample from z0 (each lane's exact power at the samples k % 256 == 0, anchor_re/im
/// [k / 256]), along += w x z, weight += w |z|^2. Compiled for AVX2 and the baseline (no FMA:
/// the same bits).
WANE_KERNEL_CLONES
void windowed_sums(const float* __restrict x, const float* __restrict window, std::size_t count, const double* __restrict step_re,
                   const double* __restrict step_im, const double* __restrict anchor_re, const double* __restrict anchor_im,
                   double* __restrict out) {
    lanes zr{}, zi{}, ar{}, ai{}, weight{};
    lanes sr, si;
    std::memcpy(&sr, step_re, sizeof sr), std::memcpy(&si, step_im, sizeof si);
    for (std::size_t k = 0; k < count; ++k) {
        if (k % 256 == 0) {
            std::memcpy(&zr, anchor_re + (k / 256) * amplitude_lanes, sizeof zr);
            std::memcpy(&zi, anchor_im + (k / 256) * amplitude_lanes, sizeof zi);
        } else {
            const lanes next_r = zr * sr - zi * si;
            zi = zr * si + zi * sr;
            zr = next_r;
        }
        const double w = static_cast<double>(window[k]);
        const double wx = w * static_cast<double>(x[k]);
        ar += wx * zr, ai += wx * zi;
        weight += w * (zr * zr + zi * zi);
    }
    std::memcpy(out, &ar, sizeof ar), std::memcpy(out + 4, &ai, sizeof ai), std::memcpy(out + 8, &weight, sizeof weight);
}

/// windowed_amplitude(note, sample_rate_hz, modes[l], first, window) for up to four modes, the
/// same numbers (windowed_sums).
void windowed_amplitudes(std::span<const float> note, double sample_rate_hz, std::span<const damped_mode> modes,
                         std::size_t first, std::span<const float> window, std::span<std::complex<double>> out) {
    const std::size_t count = window.size();
    assert(sample_rate_hz > 0.0 && first + count <= note.size() && count > 1);
    assert(!modes.empty() && modes.size() <= amplitude_lanes && out.size() == modes.size());
    std::array<double, amplitude_lanes> step_re{}, step_im{};
    std::vector<double> anchor_re((count + 255) / 256 * amplitude_lanes), anchor_im(anchor_re.size());
    for (std::size_t l = 0; l < amplitude_lanes; ++l) {
        const damped_mode& m = modes[std::min(l, modes.size() - 1)];  // a lane past the modes repeats the last
        const std::complex<double> s{-m.decay_per_s, -two_pi * m.freq_hz};
        const std::complex<double> step = std::exp(s / sample_rate_hz);
        step_re[l] = step.real(), step_im[l] = step.imag();
        for (std::size_t k = 0; k < count; k += 256) {
            const std::complex<double> z = std::exp(s * (static_cast<double>(first + k) / sample_rate_hz));
            anchor_re[k / 256 * amplitude_lanes + l] = z.real(), anchor_im[k / 256 * amplitude_lanes + l] = z.imag();
        }
    }
    std::array<double, 3 * amplitude_lanes> sums{};
    windowed_sums(note.data() + first, window.data(), count, step_re.data(), step_im.data(), anchor_re.data(), anchor_im.data(),
                  sums.data());
    for (std::size_t l = 0; l < modes.size(); ++l) {
        const std::complex<double> along{sums[l], sums[amplitude_lanes + l]};
        const double weight = sums[2 * amplitude_lanes + l];
        out[l] = weight > 0.0 ? 2.0 * along / weight : std::complex<double>{};
    }
}

}  // namespace

std::complex<double> windowed_amplitude(std::span<const float> note, double sample_rate_hz, const damped_mode& m,
                                        std::size_t first, std::size_t count) {
    return windowed_amplitude(note, sample_rate_hz, m, first, make_window(window_kind::hann, static_cast<int>(count), window_symmetry::symmetric));
}

bool heard_at_fitted_level(std::span<const float> note, std::span<const float> target, double sample_rate_hz,
                           const damped_mode& m, double level0_db, const onset_refine_params& params) {
    const std::size_t fit_n = target.size();
    if (!(level0_db < max_peak_db) || note.size() < 2 * fit_n) return false;
    const double span_db = to_level(amp_lin{std::abs(windowed_amplitude(target, sample_rate_hz, m, 0, fit_n))}).db;
    // Steady projections (no decay assumed) on the span and on the next.
    const damped_mode steady{.freq_hz = m.freq_hz, .decay_per_s = 0.0};
    const double first_db = to_level(amp_lin{std::abs(windowed_amplitude(note, sample_rate_hz, steady, 0, fit_n))}).db;
    const double next_db = to_level(amp_lin{std::abs(windowed_amplitude(note, sample_rate_hz, steady, fit_n, fit_n))}).db;
    // The Hann windows' centres lie fit_n apart: a mode of T60 loud_lasting_t60_s falls
    // 60 fit_n / (fs T60) dB between them.
    const double lasting_drop_db = 60.0 * static_cast<double>(fit_n) / (sample_rate_hz * params.loud_lasting_t60_s);
    return span_db >= level0_db - params.loud_heard_db && next_db >= first_db - lasting_drop_db;
}

std::vector<damped_mode> lasting_modes(std::span<const damped_mode> candidates, std::span<const float> note,
                                       double sample_rate_hz, std::size_t span_n, const onset_refine_params& params) {
    std::vector<damped_mode> out;
    const double floor_ratio = std::pow(10.0, -params.lasting_tolerance_db / 20.0);
    const auto is_short = [&](const damped_mode& c) { return ln1000 / c.decay_per_s <= params.max_new_t60_s; };
    // A long candidate is measured on [0, span_n) and [span_n, 2 span_n): without them it is left out.
    const bool measurable = note.size() >= 2 * span_n && span_n >= 2;
    // The long candidates' amplitudes on both spans, four candidates at a time (windowed_amplitudes).
    std::vector<damped_mode> long_ones;
    if (measurable)
        for (const damped_mode& c : candidates)
            if (!is_short(c)) long_ones.push_back(c);
    std::vector<std::complex<double>> early(long_ones.size()), late(long_ones.size());
    if (!long_ones.empty()) {
        const std::vector<float> window = make_window(window_kind::hann, static_cast<int>(span_n), window_symmetry::symmetric);
        for (std::size_t i = 0; i < long_ones.size(); i += amplitude_lanes) {
            const std::size_t n = std::min(amplitude_lanes, long_ones.size() - i);
            const std::span<const damped_mode> some = std::span(long_ones).subspan(i, n);
            windowed_amplitudes(note, sample_rate_hz, some, 0, window, std::span(early).subspan(i, n));
            windowed_amplitudes(note, sample_rate_hz, some, span_n, window, std::span(late).subspan(i, n));
        }
    }
    std::size_t at = 0;  // into long_ones, in the candidates' order
    for (const damped_mode& c : candidates) {
        if (is_short(c)) {
            out.push_back(c);
            continue;
        }
        if (!measurable) continue;
        const double e = std::abs(early[at]), l = std::abs(late[at]);
        ++at;
        if (e > 0.0 && l >= floor_ratio * e) out.push_back(c);
    }
    return out;
}

std::vector<damped_mode> stable_modes(std::span<const damped_mode> candidates, std::span<const damped_mode> again,
                                      double cluster_hz, const onset_refine_params& params) {
    std::vector<damped_mode> out;
    for (const damped_mode& c : candidates) {
        const bool stable = std::any_of(again.begin(), again.end(), [&](const damped_mode& m) {
            return std::abs(m.freq_hz - c.freq_hz) < params.stable_freq_cells * cluster_hz &&
                   std::abs(m.decay_per_s - c.decay_per_s) <= params.stable_decay_rel * c.decay_per_s;
        });
        if (stable) out.push_back(c);
    }
    return out;
}

std::vector<damped_mode> kept_new_modes(std::span<const float> target, double sample_rate_hz,
                                        std::span<const damped_mode> modes, std::span<const mode_shape> shapes,
                                        std::span<const double> energy, std::size_t first_new,
                                        const onset_refine_params& params, std::span<const double> residual) {
    assert(sample_rate_hz > 0.0 && shapes.size() == modes.size() && energy.size() == modes.size());
    assert(first_new <= modes.size() && (residual.empty() || residual.size() == target.size()));
    std::vector<damped_mode> kept;
    if (first_new == modes.size() || target.empty()) return kept;
    double strongest = 0.0;
    for (const double e : energy) strongest = std::max(strongest, e);
    const double keep = strongest * std::pow(10.0, -params.new_mode_range_db / 10.0);
    const std::vector<float> left = residual.empty() ? fit_residual(target, sample_rate_hz, modes, shapes)
                                                     : std::vector<float>(residual.begin(), residual.end());
    const note_spectrum spectrum(left, sample_rate_hz);
    for (std::size_t i = first_new; i < modes.size(); ++i) {
        const damped_mode& m = modes[i];
        assert(shapes[i].empty());  // a new mode is plain
        if (!(energy[i] >= keep && std::abs(m.amp) <= 1.0)) continue;
        // The main lobe: the Lorentzian's half-power half-width is d / (2 pi); at least two cells.
        const double half_width_hz = std::max(2.0 * sample_rate_hz / static_cast<double>(target.size()), m.decay_per_s / pi);
        const band_energies e = band_energy_left(spectrum, target.size(), sample_rate_hz, m, m.freq_hz - half_width_hz,
                                                 m.freq_hz + half_width_hz);
        if (e.mode >= params.new_mode_share * e.left) kept.push_back(m);
    }
    return kept;
}

}  // namespace wane

#include "analysis/mode_split.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <complex>
#include <cstring>
#include <memory>
#include <numeric>
#include <optional>
#include <vector>

#include "analysis/mode_band.hpp"
#include "core/units.hpp"
#include "modes/damped_mode.hpp"
#include "modes/esprit.hpp"
#include "synthesis/kernel_clones.hpp"
#include "synthesis/render.hpp"

namespace wane {

namespace {

using cvec = std::vector<std::complex<double>>;

/// The span of the partials' long spectrum (analysis/heard_peaks.hpp), seconds from the onset.
constexpr double heard_from_s = 0.1;
constexpr double heard_to_s = 1.1;

/// The partials `which` of p (noise left out), to render at sample_rate_hz over frames samples.
patch some_of(const patch& p, std::span<const std::size_t> which) {
    patch q{.version = p.version, .note = p.note, .source = p.source, .partials = {}, .noise = {}};
    for (std::size_t k : which) q.partials.push_back(p.partials[k]);
    return q;
}

render_params partials_only(double sample_rate_hz, std::size_t frames) {
    return {.sample_rate_hz = sample_rate_hz, .length_s = static_cast<double>(frames) / sample_rate_hz, .include_noise = false};
}

/// Frames of the modes' signal take_modes_off works out at a time (a multiple of 1024).
constexpr std::size_t mode_chunk_frames = std::size_t{1} << 16;

/// sum_k Re(amp_k z_k^n) for n from first_frame (a multiple of 1024) into out (double recursion,
/// re-anchored every 1024 samples: a stretch is the same samples as from n = 0). The modes
/// advance together, sample by sample: their recursions are independent chains in flight at once.
/// w z written out on real and imaginary parts apart, (a + ib)(c + id) = (ac - bd) + i(ad + bc):
/// std::complex's product where it is finite (its NaN recovery aside; the amplitudes are finite and
/// |z| < 1), without its per-sample NaN test.
void mode_signal(std::span<const damped_mode> modes, double sample_rate_hz, std::size_t first_frame, std::span<float> out) {
    assert(first_frame % 1024U == 0U);
    const std::size_t count = modes.size();
    std::vector<std::complex<double>> a(count);
    // Per mode: z's real and imaginary part, then w's (the running amp z^n).
    std::vector<double> z_re(count), z_im(count), w_re(count), w_im(count);
    for (std::size_t k = 0; k < count; ++k) {
        a[k] = {-modes[k].decay_per_s / sample_rate_hz, two_pi * modes[k].freq_hz / sample_rate_hz};
        const std::complex<double> z = std::exp(a[k]);
        z_re[k] = z.real(), z_im[k] = z.imag();
    }
    for (std::size_t i = 0; i < out.size(); ++i) {
        const std::size_t n = first_frame + i;
        if ((n & 1023U) == 0U)
            for (std::size_t k = 0; k < count; ++k) {
                const std::complex<double> w = modes[k].amp * std::exp(a[k] * static_cast<double>(n));
                w_re[k] = w.real(), w_im[k] = w.imag();
            }
        double sum = 0.0;
        for (std::size_t k = 0; k < count; ++k) {
            sum += w_re[k];
            const double next_re = w_re[k] * z_re[k] - w_im[k] * z_im[k];
            w_im[k] = w_re[k] * z_im[k] + w_im[k] * z_re[k];
            w_re[k] = next_re;
        }
        out[i] = static_cast<float>(sum);
    }
}

/// residual[n] = (residual[n] + own[n]) - modes(n) for every n (the target less the modes, in
/// the float steps of forming the target first), the modes' signal a chunk at a time.
void take_modes_off(std::span<float> residual, std::span<const float> own, std::span<const damped_mode> modes,
                    double sample_rate_hz) {
    assert(own.size() == residual.size());
    std::vector<float> chunk(std::min(residual.size(), mode_chunk_frames));
    for (std::size_t first = 0; first < residual.size(); first += chunk.size()) {
        const std::span<float> part = std::span(chunk).first(std::min(chunk.size(), residual.size() - first));
        mode_signal(modes, sample_rate_hz, first, part);
        for (std::size_t i = 0; i < part.size(); ++i) residual[first + i] = (residual[first + i] + own[first + i]) - part[i];
    }
}

/// Eight float lanes (GCC/Clang vector extensions): one AVX register, two SSE registers.
using vfloat8 = float __attribute__((vector_size(32)));

/// work[n] = residual[n] + work[n] for every n (the candidate's own render made its target, in
/// place), returning max |own[n]| over the render as it came in (0 for none): one pass over the
/// note where a separate maximum and sum took two. The maximum is the same in any order, lane by
/// lane as a scalar would take it (a NaN never replaces a lane's maximum: the comparison is false).
WANE_KERNEL_CLONES
float add_own_keep_loudest(std::span<const float> residual, std::span<float> work) {
    assert(residual.size() == work.size());
    constexpr std::size_t lanes = 8;
    vfloat8 top{};
    std::size_t n = 0;
    for (; n + lanes <= work.size(); n += lanes) {
        vfloat8 own, res;
        std::memcpy(&own, work.data() + n, sizeof own);
        std::memcpy(&res, residual.data() + n, sizeof res);
        const vfloat8 size = own < 0.0F ? -own : own;
        top = size > top ? size : top;
        const vfloat8 sum = res + own;
        std::memcpy(work.data() + n, &sum, sizeof sum);
    }
    float loudest = 0.0F;
    for (std::size_t k = 0; k < lanes; ++k) loudest = std::max(loudest, top[k]);
    for (; n < work.size(); ++n) {
        loudest = std::max(loudest, std::abs(work[n]));
        work[n] = residual[n] + work[n];
    }
    return loudest;
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

/// late_band_error_db (analysis/mode_band.hpp) with the split's late span.
double late_error_db(const cvec& rec, const cvec& cand, double band_rate_hz, const mode_split_params& params) {
    return late_band_error_db(rec, cand, band_rate_hz, {.from_s = params.late_from_s, .block_s = params.late_block_s,
                                                        .range_db = params.late_range_db});
}

struct mode_set {
    std::vector<damped_mode> modes;
    double band_rss = 0.0;  ///< residual energy of the band (band samples from the settling on)
    cvec band;              ///< the modes' band
};

/// Band samples between two of band_of_modes' powers made whole (exp), the others one product on.
constexpr std::size_t band_power_stretch = 16;

/// The band of a sum of modes as band_of gives it, exactly: a mode Re(amp z^n) leaves amp / 2 w^n
/// at 0 Hz (w = z exp(-i 2 pi f_c / fs); the image at -2 f_c is filtered out), and the three running
/// means of d samples multiply it by H(w) = ((1/d) sum_{j < d} w^-j)^3 once n >= 3 (d - 1). The
/// powers w^n at the band's samples n = m d + 3 (d - 1): exp(a n) at every band_power_stretch-th
/// m, between them the one before times w^d (a few ulps off at most over a stretch; a complex exp
/// per sample cost 16 times as much).
cvec band_of_modes(std::span<const damped_mode> modes, double centre_hz, double sample_rate_hz, std::size_t d,
                   std::size_t count) {
    cvec out(count);
    for (const damped_mode& m : modes) {
        const std::complex<double> a{-m.decay_per_s / sample_rate_hz, two_pi * (m.freq_hz - centre_hz) / sample_rate_hz};
        const std::complex<double> mean = geometric_sum(-a, static_cast<double>(d)) / static_cast<double>(d);
        const std::complex<double> h = mean * mean * mean;
        const std::complex<double> c = 0.5 * m.amp * h;
        const std::complex<double> step = std::exp(a * static_cast<double>(d));
        std::complex<double> power;
        for (std::size_t i = 0; i < count; ++i) {
            if (i % band_power_stretch == 0) {
                power = std::exp(a * static_cast<double>(i * d + 3 * (d - 1)));
            } else {
                power *= step;
            }
            out[i] += c * power;
        }
    }
    return out;
}

double band_residual(const cvec& band, const cvec& model, std::size_t settle) {
    double e = 0.0;
    for (std::size_t i = settle; i < std::min(band.size(), model.size()); ++i) e += std::norm(band[i] - model[i]);
    return e;
}

/// The modes of one order from the band's poles; empty when a pole lies out of range or grows, or
/// two lie closer than min_separation_hz (header).
std::optional<std::vector<damped_mode>> modes_of_poles(std::span<const std::complex<double>> poles, int order, double freq_hz,
                                                       double band_rate_hz, const mode_split_params& params) {
    if (static_cast<int>(poles.size()) != order) return std::nullopt;
    std::vector<damped_mode> out;
    constexpr double longest_t60_s = 60.0;  // a mode of a few seconds of recording: no drone
    for (const auto& z : poles) {
        const double offset_hz = std::arg(z) * band_rate_hz / two_pi;
        const double decay = -std::log(std::abs(z)) * band_rate_hz;
        if (std::abs(offset_hz) > params.max_offset_hz || !(decay > ln1000 / longest_t60_s)) return std::nullopt;
        out.push_back({.freq_hz = freq_hz + offset_hz, .decay_per_s = decay, .amp = {}});
    }
    // A mode shorter than min_separation_t60_s is down 60 * 0.1 / T60 dB (20 at 0.3 s) where the
    // pitch is read (0.1-1.1 s) and its frequency is unsure by more than the separation (its band
    // is decay / pi Hz wide): no pair with it counts; check_modes still weighs it as heard.
    const double lasting_decay_per_s = ln1000 / params.min_separation_t60_s;
    for (std::size_t i = 0; i < out.size(); ++i)
        for (std::size_t j = 0; j < i; ++j)
            if (std::abs(out[i].freq_hz - out[j].freq_hz) < params.min_separation_hz &&
                out[i].decay_per_s < lasting_decay_per_s && out[j].decay_per_s < lasting_decay_per_s)
                return std::nullopt;
    return out;
}

/// The mode's offset from freq_hz is more than max_heard_shift_cents (check_modes's test of the
/// mode heard most).
bool shifted(const damped_mode& m, double freq_hz, const mode_split_params& params) {
    return std::abs(1200.0 * std::log2(m.freq_hz / freq_hz)) > params.max_heard_shift_cents;
}

/// The fitted modes as a mode set; empty when a mode is louder than tame_amp or the mode heard
/// most over 0.1-1.1 s moved (header).
std::optional<mode_set> check_modes(std::vector<damped_mode> modes, const cvec& band, std::size_t settle, double freq_hz,
                                    std::size_t d, double sample_rate_hz, double tame_amp, const mode_split_params& params) {
    mode_set out{.modes = std::move(modes), .band_rss = 0.0, .band = {}};
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
    if (shifted(*main, freq_hz, params)) return std::nullopt;
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
/// four real parameters) among the orders whose modes pass modes_of_poles and check_modes; empty when none does.
std::optional<mode_set> choose_modes(const cvec& band, double freq_hz, std::size_t d, std::span<const float> target,
                                     double sample_rate_hz, double tame_amp, const mode_split_params& params) {
    constexpr std::size_t settle = 3;  // the band's first samples, where the note's start sits
    const double count = 2.0 * static_cast<double>(band.size() > settle ? band.size() - settle : 0);
    std::optional<mode_set> best;
    double best_cost = infinity;
    if (band.size() <= settle) return best;
    // ESPRIT of every order from one eigen-decomposition of the band after the settling.
    const std::span<const std::complex<double>> seg(band.data() + settle, band.size() - settle);
    const auto poles = esprit_poles_by_order(seg, params.esprit_dimension, params.max_modes);
    const double band_rate_hz = sample_rate_hz / static_cast<double>(d);
    std::vector<std::optional<std::vector<damped_mode>>> sets;
    for (int order = 1; order <= params.max_modes; ++order)
        sets.push_back(modes_of_poles(poles[static_cast<std::size_t>(order - 1)], order, freq_hz, band_rate_hz, params));
    // A set none of whose modes lies within max_heard_shift_cents of f fails check_modes whatever
    // its amplitudes (the mode heard most is one of them): it is not fitted.
    for (auto& set : sets)
        if (set && std::all_of(set->begin(), set->end(), [&](const damped_mode& m) { return shifted(m, freq_hz, params); }))
            set.reset();
    fit_mode_amplitude_sets(target, sample_rate_hz, sets);
    for (int order = 1; order <= params.max_modes; ++order) {
        auto& modes = sets[static_cast<std::size_t>(order - 1)];
        if (!modes) continue;
        auto set = check_modes(std::move(*modes), band, settle, freq_hz, d, sample_rate_hz, tame_amp, params);
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
    // No candidate, no residual to render (the list depends on p as it came in only).
    const std::vector<std::size_t> tried = candidates(p, sample_rate_hz, params);
    if (tried.empty()) return summary;
    std::vector<std::size_t> all(p.partials.size());
    std::iota(all.begin(), all.end(), std::size_t{0});
    // The buffers' floats are left unset: the renders write every one (the partials' renderer, render_patch's
    // frames without noise: the same bits).
    const auto residual_floats = std::make_unique_for_overwrite<float[]>(frames);
    const std::span<float> residual(residual_floats.get(), frames);
    partial_renderer(some_of(p, all), partials_only(sample_rate_hz, frames)).render(0, residual);
    for (std::size_t n = 0; n < frames; ++n) residual[n] = note[n] - residual[n];
    std::vector<partial> appended;
    // One note-long buffer besides the residual: the candidate's own render (render_patch's frames),
    // made its target (residual + own) in place, and its own render again once modes are found.
    const auto work_floats = std::make_unique_for_overwrite<float[]>(frames);
    const std::span<float> work(work_floats.get(), frames);
    for (std::size_t k : tried) {
        const std::size_t one[] = {k};
        const partial_renderer own_of(some_of(p, one), partials_only(sample_rate_hz, frames));
        assert(own_of.frames() == frames);
        own_of.render(0, work);
        const auto loudest = static_cast<double>(add_own_keep_loudest(residual, work));
        const std::span<const float> target = work;
        const double freq_hz = p.partials[k].freq_hz;
        const cvec band = band_of(target, freq_hz, sample_rate_hz, d);
        const auto best = choose_modes(band, freq_hz, d, target, sample_rate_hz,
                                       loudest * to_amp(level_db{params.max_rise_db}).lin, params);
        if (!best) continue;
        // The tests below, the cheapest first (the first 100 ms; then those that need the
        // partial's own band): each must pass.
        const std::vector<float> early_target(target.begin(), target.begin() + static_cast<std::ptrdiff_t>(std::min(early, frames)));
        std::vector<float> early_modes(early_target.size());
        mode_signal(best->modes, sample_rate_hz, 0, early_modes);
        if (residual_energy(early_target, early_modes, early) > energy(residual, early)) continue;
        own_of.render(0, work);
        const std::span<const float> own = work;
        const cvec own_band = band_of(own, freq_hz, sample_rate_hz, d);
        if (best->band_rss * min_gain * min_gain > band_residual(band, own_band, 3)) continue;
        const double late_now = late_error_db(band, own_band, sample_rate_hz / static_cast<double>(d), params);
        const double late_new = late_error_db(band, best->band, sample_rate_hz / static_cast<double>(d), params);
        if (late_new > late_now + params.late_tolerance_db) continue;
        take_modes_off(residual, own, best->modes, sample_rate_hz);
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

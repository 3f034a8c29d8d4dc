// The oscillator bank. Each partial's samples are cut into spans with one closed form each: the
// attack (linear ramp times a unit phasor) and one span per decay segment (exponential times a
// phasor). Within a span the partial is Re(z_n) with z_{n+1} = m z_n, m = r e^(j w) constant.
//
// Layout: the output is computed in blocks of render_anchor_frames. For every block and span the
// oscillator is anchored from the exact double-precision value (std::exp and std::cos/sin of the
// formula at the block's first frame), split into `lanes` independent lanes holding z * m^l
// (l = 0 .. lanes-1, m^l precomputed in double at plan time), and each lane is advanced by m^lanes
// (rounded to float). The lane loop has no dependency between lanes, so the compiler vectorizes
// it; there is no branch and no libm call per sample. Partials add into a float block buffer,
// flushed every partials_per_flush partials into a double block accumulator.
//
// Float error budget (bounded, does not grow with render length): a lane runs at most
// render_anchor_frames / render_lanes = 32 steps from its exact anchor, each step one float complex
// multiply (relative error ~ 2^-24 each) with the float-rounded m^lanes (~ 2^-24 systematic), so
// the relative error stays below ~32 * 2 * 2^-24 ~ 3.8e-6 (-108 dB) in the worst case and is far
// smaller on average (error energy -128 dB in tests/unit/test_render.cpp).
//
// A gliding partial (glide_cents != 0, core/glide.hpp) is computed sample by sample from the exact
// formula, amplitude (the span's closed form) times cos(theta(t)) in double (add_gliding_part: its
// rounding keeps the phase within 1e-7 rad of the formula's), up to the frame where
// the glide's remaining phase falls under glide_phase_tolerance_rad (1e-6 rad: an error vector
// 120 dB under the partial); from there on it runs in the phasor lanes like any partial, at its
// constant frequency and the settled phase phase_rad + G (the glide's whole phase).
#include "synthesis/render.hpp"
#include "synthesis/noise_render.hpp"
#include "synthesis/phasor_powers.hpp"
#include "synthesis/damped_kernels.hpp"
#include "synthesis/kernel_clones.hpp"
#include "core/glide.hpp"
#include "core/sincos_poly.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <complex>
#include <cstdint>
#include <cstring>
#include <numbers>

namespace wane {

namespace {

/// Independent oscillator lanes per partial: 4 vectors of 8 floats per component, i.e. four
/// independent dependency chains, enough to keep the multipliers busy.
constexpr std::size_t lanes = render_lanes;
static_assert(render_anchor_frames % lanes == 0);
/// Partials summed in the float block buffer before it is added to the double accumulator.
constexpr std::size_t partials_per_flush = 32;
/// Nepers of amplitude per dB: ln(10) / 20.
constexpr double neper_per_db = 1.0 / db_per_neper;
/// The silence floor in nepers of amplitude.
constexpr double ln_silence_amp = render_silence_level.db * neper_per_db;

// The hot kernels: one body each (damped_kernels.hpp), inlined into render_partials_range's clones
// (for AVX2 and for the baseline).
[[gnu::always_inline]] inline void add_damped(float* __restrict out, std::size_t frames, const float* __restrict re0,
                const float* __restrict im0, float step_re, float step_im) {
    damped_kernels::add_damped_lanes(out, frames, re0, im0, step_re, step_im);
}

[[gnu::always_inline]] inline void add_ramped(float* __restrict out, std::size_t frames, const float* __restrict re0,
                const float* __restrict im0, const float* __restrict amp0, float step_re,
                float step_im, float amp_step) {
    damped_kernels::add_ramped_lanes(out, frames, re0, im0, amp0, step_re, step_im, amp_step);
}

enum class span_kind : unsigned char { ramp, decay };

/// One stretch of frames [begin, end) of a partial with a single closed form.
///   ramp:  A(n) = amp_per_frame * n                          (the attack; A(0) = 0)
///   decay: ln A(n) = ln_amp_begin + ln_amp_per_frame * (n - begin)    (nepers)
/// The per-frame phasor factor is m = exp(ln_amp_per_frame) e^(j 2 pi f / rate); m_pow holds m^l
/// for l < lanes (exact double, as re/im arrays), step = m^lanes rounded to float.
struct span {
    std::size_t begin = 0;
    std::size_t end = 0;
    span_kind kind = span_kind::decay;
    double amp_per_frame = 0.0;
    double ln_amp_begin = 0.0;
    double ln_amp_per_frame = 0.0;
    std::array<double, lanes> m_pow_re{};
    std::array<double, lanes> m_pow_im{};
    float step_re = 1.0F;
    float step_im = 0.0F;
};

/// First frame n with n / rate >= time_s (the frame that a boundary at time_s belongs to), with
/// t = n / rate evaluated exactly as the formula's definition does. time_s >= 0.
std::size_t first_frame_at_or_after(double time_s, double rate_hz, std::size_t total_frames) {
    if (!(time_s * rate_hz < static_cast<double>(total_frames))) return total_frames;
    auto n = static_cast<std::size_t>(std::ceil(time_s * rate_hz));
    while (n > 0 && static_cast<double>(n - 1) / rate_hz >= time_s) --n;
    while (static_cast<double>(n) / rate_hz < time_s) ++n;
    return std::min(n, total_frames);
}

/// Exact per-frame powers m^l, l < lanes, and m^lanes in float, for a phasor turning by u and changing by
/// rho (synthesis/phasor_powers.hpp): rho[l] u[l], the products std::polar forms (rho cos, rho sin).
void set_phasor_powers(span& s, const lane_turns& u, const lane_decays& rho) {
    for (std::size_t l = 0; l <= lanes; ++l) {
        const double re = rho[l] * u[l].real(), im = rho[l] * u[l].imag();
        if (l < lanes) s.m_pow_re[l] = re, s.m_pow_im[l] = im;
        else s.step_re = static_cast<float>(re), s.step_im = static_cast<float>(im);
    }
}

/// The render plan: per partial (structs of arrays) and the flat list of spans.
struct render_plan {
    std::size_t frames = 0;
    std::vector<double> gain_lin;          ///< overall gain times band-limit gain
    std::vector<double> ln_gain;           ///< ln(gain_lin), nepers
    std::vector<double> cycles_per_frame;  ///< f / rate
    std::vector<double> phase_rad;         ///< the settled phase: phase_rad + the glide's whole phase
    // Glide (core/glide.hpp): frames before glide_end are computed from the exact formula.
    std::vector<std::size_t> glide_end;    ///< 0 without a glide
    std::vector<double> freq_hz;
    std::vector<double> glide_cents;
    std::vector<double> glide_s;
    std::vector<std::size_t> span_first;
    std::vector<std::size_t> span_last;    ///< one past the partial's last span
    std::vector<span> spans;
};

render_plan make_plan(const patch& p, const render_params& params) {
    const double rate = params.sample_rate_hz;
    render_plan plan;
    plan.frames = render_frames(p, params);
    const double total_gain = to_amp(level_db{p.note.gain_db + params.gain_db}).lin;
    for (const partial& part : p.partials) {
        const double band_gain = band_limit_gain(part.freq_hz, rate);
        const double peak_amp = to_amp(part.env.peak).lin;
        if (band_gain <= 0.0 || !(peak_amp > 0.0)) continue;
        const double cpf = part.freq_hz / rate;
        plan.gain_lin.push_back(total_gain * band_gain);
        plan.ln_gain.push_back(std::log(total_gain * band_gain));
        plan.cycles_per_frame.push_back(cpf);
        plan.phase_rad.push_back(part.phase_rad +
                                 glide_total_phase_rad(part.freq_hz, part.glide_cents, part.glide_s));
        plan.glide_end.push_back(part.glide_cents == 0.0
                                     ? 0
                                     : first_frame_at_or_after(glide_settled_s(part.freq_hz, part.glide_cents,
                                                                               part.glide_s),
                                                               rate, plan.frames));
        plan.freq_hz.push_back(part.freq_hz);
        plan.glide_cents.push_back(part.glide_cents);
        plan.glide_s.push_back(part.glide_s);
        plan.span_first.push_back(plan.spans.size());
        const lane_turns turns = lane_turns_of(cpf);

        const std::size_t attack_end = first_frame_at_or_after(part.env.attack_s, rate, plan.frames);
        if (attack_end > 0) {
            span s{.begin = 0, .end = attack_end, .kind = span_kind::ramp,
                   // A(t) = peak * t / attack_s with t = n / rate
                   .amp_per_frame = peak_amp / (part.env.attack_s * rate)};
            set_phasor_powers(s, turns, lane_decays_of(0.0));
            plan.spans.push_back(s);
        }
        for (const envelope_piece& piece : envelope_pieces(part.env)) {
            const std::size_t begin = first_frame_at_or_after(piece.start_s, rate, plan.frames);
            const std::size_t end = std::isinf(piece.end_s)
                                        ? plan.frames
                                        : first_frame_at_or_after(piece.end_s, rate, plan.frames);
            if (begin >= end) continue;
            // level(t) = start_level + slope (t - start_s) in dB; ln A = level * ln(10) / 20.
            const double t_begin_s = static_cast<double>(begin) / rate;
            span s{.begin = begin, .end = end, .kind = span_kind::decay,
                   .ln_amp_begin = neper_per_db *
                                   (piece.start_level.db + piece.slope_db_per_s * (t_begin_s - piece.start_s)),
                   .ln_amp_per_frame = neper_per_db * piece.slope_db_per_s / rate};
            set_phasor_powers(s, turns, lane_decays_of(s.ln_amp_per_frame));
            plan.spans.push_back(s);
        }
        plan.span_last.push_back(plan.spans.size());
    }
    return plan;
}

/// Exact unit phasor e^(j (2 pi f n / rate + phase)) at frame n; the phase in cycles is reduced
/// modulo 1 before scaling so it keeps full double precision over long renders.
std::complex<double> exact_phasor(double cycles_per_frame, double phase_rad, std::size_t n) {
    double cycles = static_cast<double>(n) * cycles_per_frame;
    cycles -= std::floor(cycles);
    return std::polar(1.0, two_pi * cycles + phase_rad);
}

/// Lane anchors z m^l (l < lanes) in double from the exact anchor z = (z_re, z_im), rounded to float.
void set_lane_anchors(const span& s, double z_re, double z_im, float* re, float* im) {
    for (std::size_t l = 0; l < lanes; ++l) {
        re[l] = static_cast<float>(z_re * s.m_pow_re[l] - z_im * s.m_pow_im[l]);
        im[l] = static_cast<float>(z_re * s.m_pow_im[l] + z_im * s.m_pow_re[l]);
    }
}

// The gliding frames' cosines: out[i] += amp[i] cos(2 pi (first_cycles + i cycles_per_frame) + phase_rad
// - remaining_rad[i]), in double. The angles' sines and cosines by sincos_poly (branch-free) into
// sin_work and cos_work in one loop, both kept so that the compiler vectorizes it rather than
// branching to the one polynomial a cosine needs; a 32-bit index, whose conversion vectorizes.
[[gnu::always_inline]] inline void add_glide_cosines(float* __restrict out, std::size_t frames, const double* __restrict amp,
                       const double* __restrict remaining_rad, double first_cycles, double cycles_per_frame,
                       double phase_rad, double* __restrict sin_work, double* __restrict cos_work) {
    assert(frames <= render_anchor_frames);
    const auto count = static_cast<std::int32_t>(frames);
    for (std::int32_t i = 0; i < count; ++i) {
        const double cycles = first_cycles + static_cast<double>(i) * cycles_per_frame;
        sincos_poly(two_pi * cycles + phase_rad - remaining_rad[i], sin_work[i], cos_work[i]);
    }
    for (std::int32_t i = 0; i < count; ++i) out[i] += static_cast<float>(amp[i] * cos_work[i]);
}

/// The gliding frames [from, to) of span s (before the partial's glide_end, within one block of
/// render_anchor_frames) from the exact formula: A(n) cos(theta_settled(n) - R(n / rate)) in
/// double. A decaying A and the decay factor e^(-t / tau) R is made of are exact at `from`
/// (std::exp) and walked on by one product a frame: under render_anchor_frames products, a
/// relative error under 1024 * 2^-52 = 2.3e-13, which puts R off by under 3e-13 |R| (Ein's
/// relative slope x Ein'(x) / Ein(x) is under 1.3 for |x| <= ln 2), 8e-8 rad at the keys' limits
/// (|R| <= 2 pi 24 kHz 2 s Ein(ln 2) = 2.5e5 rad) and 1e-11 rad for a 150-cent glide of 0.2 s at
/// 1 kHz; R by glide_remaining_phases_at_decays_rad, the cosine by sincos_poly (error under 1e-15).
[[gnu::always_inline]] inline void add_gliding_part(const render_plan& plan, std::size_t k, const span& s, std::size_t from,
                      std::size_t to, std::size_t block_begin, float* block, double rate_hz) {
    assert(from < to && to - from <= render_anchor_frames);
    const std::size_t count = to - from;
    // Work arrays, not zeroed: each of their first count values is written before it is read.
    alignas(64) std::array<double, render_anchor_frames> amp, decay, remaining_rad;
    const double from_s = static_cast<double>(from) / rate_hz;
    double d = std::exp(-from_s / plan.glide_s[k]);
    const double d_step = std::exp(-1.0 / (rate_hz * plan.glide_s[k]));
    for (std::size_t i = 0; i < count; ++i) {
        decay[i] = d;
        d *= d_step;
    }
    if (s.kind == span_kind::decay) {
        double a = std::exp(plan.ln_gain[k] + s.ln_amp_begin + s.ln_amp_per_frame * static_cast<double>(from - s.begin));
        const double a_step = std::exp(s.ln_amp_per_frame);
        for (std::size_t i = 0; i < count; ++i) {
            amp[i] = a;
            a *= a_step;
        }
    } else {
        const double amp_per_frame = plan.gain_lin[k] * s.amp_per_frame;
        for (std::size_t i = 0; i < count; ++i) amp[i] = amp_per_frame * static_cast<double>(from + i);
    }
    glide_remaining_phases_at_decays_rad(plan.freq_hz[k], plan.glide_cents[k], plan.glide_s[k],
                                         std::span<const double>(decay).first(count),
                                         std::span<double>(remaining_rad).first(count));
    double first_cycles = static_cast<double>(from) * plan.cycles_per_frame[k];
    first_cycles -= std::floor(first_cycles);
    alignas(64) std::array<double, render_anchor_frames> sines;
    // decay's room, no longer read, takes the cosines.
    add_glide_cosines(block + (from - block_begin), count, amp.data(), remaining_rad.data(), first_cycles,
                      plan.cycles_per_frame[k], plan.phase_rad[k], sines.data(), decay.data());
}

/// Adds one partial's frames [from, to) (inside span s) to block (block[0] is frame block_begin).
/// Anchors every lane from exact double values at `from`.
[[gnu::always_inline]] inline void add_span_part(const render_plan& plan, std::size_t k, const span& s, std::size_t from,
                   std::size_t to, std::size_t block_begin, float* block) {
    alignas(32) float re[lanes], im[lanes];
    const auto anchor = [&] { return exact_phasor(plan.cycles_per_frame[k], plan.phase_rad[k], from); };
    if (s.kind == span_kind::decay) {
        const double ln_from = plan.ln_gain[k] + s.ln_amp_begin +
                               s.ln_amp_per_frame * static_cast<double>(from - s.begin);
        const double ln_last = ln_from + s.ln_amp_per_frame * static_cast<double>(to - 1 - from);
        // Skip stretches entirely below the silence floor (the envelope is monotone in a span), unanchored.
        if (std::max(ln_from, ln_last) < ln_silence_amp) return;
        const std::complex<double> z = anchor();
        const double amp = std::exp(ln_from);
        set_lane_anchors(s, amp * z.real(), amp * z.imag(), re, im);
        add_damped(block + (from - block_begin), to - from, re, im, s.step_re, s.step_im);
    } else {
        alignas(32) float amp[lanes];
        const double amp_per_frame = plan.gain_lin[k] * s.amp_per_frame;
        const std::complex<double> z = anchor();
        set_lane_anchors(s, z.real(), z.imag(), re, im);
        for (std::size_t l = 0; l < lanes; ++l) {
            amp[l] = static_cast<float>(amp_per_frame * static_cast<double>(from + l));
        }
        add_ramped(block + (from - block_begin), to - from, re, im, amp, s.step_re, s.step_im,
                   static_cast<float>(amp_per_frame * static_cast<double>(lanes)));
    }
}

/// The partials of frames [first, first + out.size()) into out (overwritten), block by block from
/// `first`: each block anchors every oscillator from exact values, so a stretch starting at a
/// multiple of render_anchor_frames gives the same bits as the whole render. Compiled for AVX2 and the
/// baseline as the kernels are (element-wise IEEE operations, no FMA: the same bits).
WANE_KERNEL_CLONES
void render_partials_range(const render_plan& plan, std::size_t first, std::span<float> out, double rate_hz) {
    assert(first + out.size() <= plan.frames);
    const std::size_t end = first + out.size();
    const std::size_t partial_count = plan.gain_lin.size();
    std::vector<std::size_t> cursor(plan.span_first);  // first span not yet finished
    alignas(64) std::array<float, render_anchor_frames> block_f{};
    alignas(64) std::array<double, render_anchor_frames> block_d{};

    for (std::size_t b0 = first; b0 < end; b0 += render_anchor_frames) {
        const std::size_t b1 = std::min(b0 + render_anchor_frames, end);
        const std::size_t n = b1 - b0;
        block_f.fill(0.0F);
        std::size_t since_flush = 0;
        bool first_flush = true;
        auto flush = [&] {
            if (first_flush) {
                for (std::size_t i = 0; i < n; ++i) block_d[i] = static_cast<double>(block_f[i]);
            } else {
                for (std::size_t i = 0; i < n; ++i) block_d[i] += static_cast<double>(block_f[i]);
            }
            first_flush = false;
            block_f.fill(0.0F);
            since_flush = 0;
        };
        for (std::size_t k = 0; k < partial_count; ++k) {
            std::size_t& c = cursor[k];
            while (c < plan.span_last[k] && plan.spans[c].end <= b0) ++c;
            for (std::size_t si = c; si < plan.span_last[k] && plan.spans[si].begin < b1; ++si) {
                const span& s = plan.spans[si];
                const std::size_t from = std::max(s.begin, b0);
                const std::size_t to = std::min(s.end, b1);
                const std::size_t glide_to = std::clamp(plan.glide_end[k], from, to);
                if (from < glide_to) add_gliding_part(plan, k, s, from, glide_to, b0, block_f.data(), rate_hz);
                if (glide_to < to) add_span_part(plan, k, s, glide_to, to, b0, block_f.data());
            }
            if (++since_flush == partials_per_flush) flush();
        }
        if (partial_count < partials_per_flush) {
            // Fewer partials than a flush takes: the one flush below would put block_f's floats
            // in block_d exactly and the line after it take them back (float -> double -> float
            // gives the same float), so they are written out as they are.
            std::copy_n(block_f.begin(), n, out.begin() + static_cast<std::ptrdiff_t>(b0 - first));
            continue;
        }
        if (since_flush > 0 || first_flush) flush();
        for (std::size_t i = 0; i < n; ++i) out[b0 - first + i] = static_cast<float>(block_d[i]);
    }
}

/// The end fade (end_fade_gain) on frames [first, first + out.size()) of a render of total frames.
void apply_end_fade(std::size_t first, std::span<float> out, std::size_t total, double sample_rate_hz) {
    const auto fade_frames = std::min(total, static_cast<std::size_t>(std::llround(end_fade_s * sample_rate_hz)));
    for (std::size_t i = std::max(first, total - fade_frames); i < first + out.size(); ++i) {
        float& v = out[i - first];
        v = static_cast<float>(static_cast<double>(v) * end_fade_gain(i, total, sample_rate_hz));
    }
}

}  // namespace

double band_limit_gain(double freq_hz, double sample_rate_hz) {
    const double nyquist_hz = 0.5 * sample_rate_hz;
    const double fade_start_hz = band_fade_start_fraction * nyquist_hz;
    if (freq_hz >= nyquist_hz) return 0.0;
    if (freq_hz <= fade_start_hz) return 1.0;
    return 0.5 * (1.0 + std::cos(pi * (freq_hz - fade_start_hz) / (nyquist_hz - fade_start_hz)));
}

double end_fade_gain(std::size_t n, std::size_t total_frames, double sample_rate_hz) {
    const auto fade_frames = std::min(total_frames,
                                      static_cast<std::size_t>(std::llround(end_fade_s * sample_rate_hz)));
    assert(n < total_frames);
    const std::size_t fade_begin = total_frames - fade_frames;
    if (n < fade_begin) return 1.0;
    const double k = static_cast<double>(n - fade_begin);
    return 0.5 * (1.0 + std::cos(pi * (k + 1.0) / static_cast<double>(fade_frames)));
}

std::size_t render_frames(const patch& p, const render_params& params) {
    const double length_s = params.length_s > 0.0 ? params.length_s : p.note.length_s;
    return static_cast<std::size_t>(std::llround(length_s * params.sample_rate_hz));
}

std::vector<float> render_patch(const patch& p, const render_params& params) {
    assert(params.sample_rate_hz >= min_render_rate_hz && params.sample_rate_hz <= max_render_rate_hz);
    assert(p.partials.size() <= max_partials);
    const render_plan plan = make_plan(p, params);
    assert(plan.frames > 0 &&
           static_cast<double>(plan.frames) <= max_length_s * params.sample_rate_hz + 1.0);

    std::vector<float> out(plan.frames);
    render_partials_range(plan, 0, out, params.sample_rate_hz);

    // The noise bands (deterministic-plus-stochastic model), band-limited by construction.
    if (params.include_noise && !p.noise.empty()) {
        add_noise_bands(p.noise, noise_params_of(p, params), out);
    }
    apply_end_fade(0, out, plan.frames, params.sample_rate_hz);
    return out;
}

struct partial_renderer::state {
    render_plan plan;
};

partial_renderer::partial_renderer(const patch& p, const render_params& params)
    : state_(std::make_unique<state>(state{make_plan(p, params)})), sample_rate_hz_(params.sample_rate_hz) {
    assert(params.sample_rate_hz >= min_render_rate_hz && params.sample_rate_hz <= max_render_rate_hz);
    assert(p.partials.size() <= max_partials);
    assert(state_->plan.frames > 0 &&
           static_cast<double>(state_->plan.frames) <= max_length_s * params.sample_rate_hz + 1.0);
}

partial_renderer::~partial_renderer() = default;

std::size_t partial_renderer::frames() const { return state_->plan.frames; }

void partial_renderer::render(std::size_t first_frame, std::span<float> out) const {
    assert(first_frame + out.size() <= state_->plan.frames);
    render_partials_range(state_->plan, first_frame, out, sample_rate_hz_);
    apply_end_fade(first_frame, out, state_->plan.frames, sample_rate_hz_);
}

void partial_renderer::render_with_noise(const patch& p, const render_params& params, std::size_t first_frame,
                                         std::span<float> out) const {
    assert(first_frame + out.size() <= state_->plan.frames && params.sample_rate_hz == sample_rate_hz_);
    render_partials_range(state_->plan, first_frame, out, sample_rate_hz_);
    if (params.include_noise && !p.noise.empty())
        add_noise_bands_part(p.noise, noise_params_of(p, params), state_->plan.frames, first_frame, out);
    apply_end_fade(first_frame, out, state_->plan.frames, sample_rate_hz_);
}

render_summary summarize_render(const patch& p, const render_params& params) {
    render_summary s;
    s.frames = render_frames(p, params);
    for (const partial& part : p.partials) {
        const double g = band_limit_gain(part.freq_hz, params.sample_rate_hz);
        if (g <= 0.0) {
            ++s.partials_above_nyquist;
            continue;
        }
        if (!(to_amp(part.env.peak).lin > 0.0)) continue;
        ++s.partials_rendered;
        if (g < 1.0) ++s.partials_faded;
    }
    s.noise_bands_rendered = params.include_noise ? p.noise.size() : 0;
    return s;
}

}  // namespace wane

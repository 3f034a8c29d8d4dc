// The oscillator bank's hot loops (internal to src/synthesis), written once: render.cpp compiles
// them into its AVX2 and generic kernel clones (kernel_clones.hpp), and test_render compiles them
// for both targets itself to check that the two give the same bits.
#pragma once

#include <cstddef>
#include <cstring>

#include "synthesis/render.hpp"

namespace wane::damped_kernels {

/// The kernels' vector type: 8 floats (one AVX register, two SSE registers in the generic clone).
/// GCC/Clang vector extensions: the lane arithmetic is written once and each clone gets the
/// instructions of its target; element-wise IEEE operations, so every clone gives the same bits.
using vfloat = float __attribute__((vector_size(32)));
inline constexpr std::size_t vfloat_width = 8;
static_assert(render_lanes % vfloat_width == 0);
inline constexpr std::size_t lane_vectors = render_lanes / vfloat_width;

// Unaligned load/store of a vfloat (through references: no vector passes by value, so no ABI
// question between the clones).
[[gnu::always_inline]] inline void load_v(vfloat& v, const float* p) { std::memcpy(&v, p, sizeof v); }
[[gnu::always_inline]] inline void store_v(float* p, const vfloat& v) { std::memcpy(p, &v, sizeof v); }

/// Decay span: out[k] += Re(z_k) for k < frames; lane l holds z_{s*render_lanes+l} at step s
/// and is advanced by the complex factor step = m^lanes after use. re0/im0: initial lane states.
[[gnu::always_inline]] inline void add_damped_lanes(float* __restrict out, std::size_t frames,
                                                     const float* __restrict re0, const float* __restrict im0,
                                                     float step_re, float step_im) {
    vfloat re[lane_vectors];
    vfloat im[lane_vectors];
    for (std::size_t v = 0; v < lane_vectors; ++v) {
        load_v(re[v], re0 + v * vfloat_width);
        load_v(im[v], im0 + v * vfloat_width);
    }
    const std::size_t steps = frames / render_lanes;
    for (std::size_t s = 0; s < steps; ++s) {
        float* o = out + s * render_lanes;
        for (std::size_t v = 0; v < lane_vectors; ++v) {
            vfloat acc;
            load_v(acc, o + v * vfloat_width);
            store_v(o + v * vfloat_width, acc + re[v]);
            const vfloat nr = re[v] * step_re - im[v] * step_im;
            const vfloat ni = re[v] * step_im + im[v] * step_re;
            re[v] = nr;
            im[v] = ni;
        }
    }
    float tail[render_lanes];
    std::memcpy(tail, re, sizeof tail);
    float* o = out + steps * render_lanes;
    for (std::size_t l = 0; l < frames - steps * render_lanes; ++l) o[l] += tail[l];
}

/// Attack span: out[k] += a_k Re(z_k) with a unit phasor z and a linear amplitude a;
/// lane amplitudes advance by the additive increment amp_step (= lanes * amplitude per frame).
[[gnu::always_inline]] inline void add_ramped_lanes(float* __restrict out, std::size_t frames,
                                                     const float* __restrict re0, const float* __restrict im0,
                                                     const float* __restrict amp0, float step_re, float step_im,
                                                     float amp_step) {
    vfloat re[lane_vectors];
    vfloat im[lane_vectors];
    vfloat amp[lane_vectors];
    for (std::size_t v = 0; v < lane_vectors; ++v) {
        load_v(re[v], re0 + v * vfloat_width);
        load_v(im[v], im0 + v * vfloat_width);
        load_v(amp[v], amp0 + v * vfloat_width);
    }
    const std::size_t steps = frames / render_lanes;
    for (std::size_t s = 0; s < steps; ++s) {
        float* o = out + s * render_lanes;
        for (std::size_t v = 0; v < lane_vectors; ++v) {
            vfloat acc;
            load_v(acc, o + v * vfloat_width);
            store_v(o + v * vfloat_width, acc + amp[v] * re[v]);
            const vfloat nr = re[v] * step_re - im[v] * step_im;
            const vfloat ni = re[v] * step_im + im[v] * step_re;
            re[v] = nr;
            im[v] = ni;
            amp[v] += amp_step;
        }
    }
    float tail_re[render_lanes];
    float tail_amp[render_lanes];
    std::memcpy(tail_re, re, sizeof tail_re);
    std::memcpy(tail_amp, amp, sizeof tail_amp);
    float* o = out + steps * render_lanes;
    for (std::size_t l = 0; l < frames - steps * render_lanes; ++l) o[l] += tail_amp[l] * tail_re[l];
}

}  // namespace wane::damped_kernels

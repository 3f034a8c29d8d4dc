// The noise renderer's sample loops (synthesis/noise_render.cpp), each compiled for AVX2 and for
// the baseline (synthesis/kernel_clones.hpp: a multiply, then an add, the same bits in every
// clone). Internal to src/synthesis.
#pragma once

#include <cstddef>

namespace wane::noise_kernels {

/// acc[n] += gain * src[n], n < count. With onto_zero, acc[n] = 0 + gain * src[n]: that sum on a
/// zeroed acc, written without the zeros being stored and read first (the same bits, the sum's
/// +0 for a product of -0 included).
void add_scaled(float* acc, const float* src, float gain, std::size_t count, bool onto_zero);

/// acc[n] += gain * (amp[n] * src[n]), n < count; onto_zero as add_scaled's.
void add_modulated(float* acc, const float* src, const float* amp, float gain, std::size_t count, bool onto_zero);

/// out[n] += frame[n] * window[n], n < count.
void add_windowed(float* out, const float* frame, const float* window, std::size_t count);

}  // namespace wane::noise_kernels

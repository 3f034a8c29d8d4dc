#include "synthesis/noise_kernels.hpp"

#include "synthesis/kernel_clones.hpp"

namespace wane::noise_kernels {

WANE_KERNEL_CLONES
void add_scaled(float* __restrict acc, const float* __restrict src, float gain, std::size_t count, bool onto_zero) {
    if (onto_zero) {
        for (std::size_t n = 0; n < count; ++n) acc[n] = 0.0f + gain * src[n];
    } else {
        for (std::size_t n = 0; n < count; ++n) acc[n] += gain * src[n];
    }
}

WANE_KERNEL_CLONES
void add_modulated(float* __restrict acc, const float* __restrict src, const float* __restrict amp, float gain,
                   std::size_t count, bool onto_zero) {
    if (onto_zero) {
        for (std::size_t n = 0; n < count; ++n) acc[n] = 0.0f + gain * (amp[n] * src[n]);
    } else {
        for (std::size_t n = 0; n < count; ++n) acc[n] += gain * (amp[n] * src[n]);
    }
}

WANE_KERNEL_CLONES
void add_windowed(float* __restrict out, const float* __restrict frame, const float* __restrict window,
                  std::size_t count) {
    for (std::size_t n = 0; n < count; ++n) out[n] += frame[n] * window[n];
}

}  // namespace wane::noise_kernels

#include "spectrum/stft.hpp"

#include <algorithm>
#include <cassert>
#include <cstdlib>
#include <new>
#include <numeric>

namespace wane {

int fast_fft_size(int min_size) {
    int n = std::max(min_size + (min_size & 1), 2);
    for (;; n += 2) {
        int r = n;
        for (int f : {2, 3, 5})
            while (r % f == 0) r /= f;
        if (r == 1) return n;
    }
}

stft_plan::stft_plan(const stft_config& config)
    : config_(config),
      window_(make_window(config.window, config.window_length, window_symmetry::symmetric)),
      correction_(config.window, config.window_length, config.fft_size) {
    assert(config.window_length % 2 == 1 && config.window_length >= 3);
    assert(config.fft_size % 2 == 0 && config.fft_size >= config.window_length);
    const double sum_w = std::accumulate(window_.begin(), window_.end(), 0.0);
    amp_scale_ = 2.0 / sum_w;
    cfg_ = kiss_fftr_alloc(config.fft_size, 0, nullptr, nullptr);
    if (cfg_ == nullptr) throw std::bad_alloc();
    frame_.assign(static_cast<std::size_t>(config.fft_size), 0.0f);
    bins_.resize(static_cast<std::size_t>(config.fft_size) / 2 + 1);
    power_.resize(bins_.size());
}

stft_plan::~stft_plan() { kiss_fftr_free(cfg_); }

void stft_plan::analyze(std::span<const float> samples, std::int64_t centre, float dc_offset) {
    const std::int64_t h = half_length();
    const std::int64_t size = static_cast<std::int64_t>(samples.size());
    const std::int64_t m_size = config_.fft_size;
    const float* w = window_.data() + h;  // w[m], m = -h..h
    float* buf = frame_.data();
    // Zero padding sits between the two halves (indices h+1 .. M-h-1); written once, never touched.
    if (centre - h >= 0 && centre + h < size) {
        // Interior frame: two straight multiply loops.
        const float* x = samples.data() + centre;
        for (std::int64_t m = 0; m <= h; ++m) buf[m] = w[m] * (x[m] - dc_offset);
        float* tail = buf + m_size;
        for (std::int64_t m = -h; m < 0; ++m) tail[m] = w[m] * (x[m] - dc_offset);
    } else {
        for (std::int64_t m = -h; m <= h; ++m) {
            const std::int64_t n = centre + m;
            const float x = (n >= 0 && n < size) ? samples[n] - dc_offset : 0.0f;
            buf[m >= 0 ? m : m_size + m] = w[m] * x;
        }
    }
    kiss_fftr(cfg_, buf, bins_.data());
    const float scale2 = static_cast<float>(amp_scale_ * amp_scale_);
    for (std::size_t k = 0; k < bins_.size(); ++k)
        power_[k] = (bins_[k].r * bins_[k].r + bins_[k].i * bins_[k].i) * scale2;
}

}  // namespace wane

#include "spectrum/stft.hpp"

#include <fftw3.h>

#include <algorithm>
#include <bitset>
#include <cassert>
#include <cstdlib>
#include <map>
#include <memory>
#include <mutex>
#include <new>
#include <numeric>
#include <utility>

#include "spectrum/fft_planning.hpp"
#include "synthesis/kernel_clones.hpp"

namespace wane {

namespace {

/// out[m] = w[m] (x[m] - dc_offset), m < count: a frame's windowed samples. Compiled for AVX2 and
/// the baseline (WANE_KERNEL_CLONES: a subtraction, then a multiply, the same bits in both; eight
/// samples a step on AVX2, four on the baseline). With power_of_bins, callgrind of `wane analyze`
/// on the synthetic note: track_note 98.17 -> 93.65 M instructions, fit_note_noise 123.07 -> 120.41.
WANE_KERNEL_CLONES
void window_samples_into(float* out, const float* w, const float* x, float dc_offset, std::size_t count) {
    for (std::size_t m = 0; m < count; ++m) out[m] = w[m] * (x[m] - dc_offset);
}

/// power[k] = (re^2 + im^2) scale2 of the interleaved (re, im) spectrum, k < count; cloned as
/// window_samples_into (no FMA in either clone: the same products and sums bit for bit).
WANE_KERNEL_CLONES
void power_of_bins(float* power, const float* spectrum, float scale2, std::size_t count) {
    for (std::size_t k = 0; k < count; ++k)
        power[k] = (spectrum[2 * k] * spectrum[2 * k] + spectrum[2 * k + 1] * spectrum[2 * k + 1]) * scale2;
}

/// FFTW's planner (plan making and destroying) is not thread-safe: one lock for the process.
std::mutex& planner_lock() {
    static std::mutex lock;
    return lock;
}

/// Imports the stored wisdom of one size (spectrum/fft_planning.hpp) so that the planner finds its
/// choices for the size and its sub-problems instead of searching them: the same plan (test_spectrum
/// compares the two), planned in 0.01-0.6 ms instead of 2-4 ms (one `wane analyze` plans about five
/// sizes). Sizes outside the table, or wisdom FFTW refuses (another FFTW build or CPU than the one
/// that made it), are planned as before. Each size's wisdom is imported once per process (an
/// import costs 0.1-0.5 ms, more than planning a size again once FFTW holds its choices). Call
/// under planner_lock(), before planning the size.
void import_stored_wisdom(int size, bool inverse) {
    constexpr std::size_t remembered = 2048;     // table entries whose import is remembered
    static std::bitset<remembered> imported;     // guarded by planner_lock()
    const auto table = stored_fft_wisdom_table();
    const auto it = std::lower_bound(table.begin(), table.end(), std::pair(inverse, size),
                                      [](const stored_fft_wisdom& w, const std::pair<bool, int>& key) {
                                          return std::pair(w.inverse, w.size) < key;
                                      });
    if (it == table.end() || it->size != size || it->inverse != inverse) return;
    const auto index = static_cast<std::size_t>(it - table.begin());
    if (index < remembered && imported[index]) return;
    fftwf_import_wisdom_from_string(it->text);
    if (index < remembered) imported[index] = true;
}

struct fftw_free_buffer {
    void operator()(float* p) const { fftwf_free(p); }
};

/// One forward (real to complex, out of place) plan per size for the process, made under the
/// planner lock on first use (after its stored wisdom) with in and out (FFTW-aligned, their
/// contents kept: FFTW_ESTIMATE's planner does not write them), and executed on any
/// FFTW-aligned buffers by FFTW's new-array execute (thread-safe): real_fft's and every
/// stft_plan's on FFTW share it, so a size is planned once per process (an analysis's tracker
/// frames and its heard peaks' spectrum at the same size, each later note of a batch). Never
/// destroyed, as inverse_real_fft's plans.
fftwf_plan shared_forward_plan(int size, float* in, fftwf_complex* out) {
    static auto* const plans = new std::map<int, fftwf_plan>();  // guarded by planner_lock()
    const std::lock_guard<std::mutex> hold(planner_lock());
    fftwf_plan& made = (*plans)[size];
    if (made == nullptr) {
        import_stored_wisdom(size, false);
        made = fftwf_plan_dft_r2c_1d(size, in, out, fft_planner_flags);
    }
    return made;
}

}  // namespace

void stft_plan::fftw_buffer_free::operator()(void* p) const { fftwf_free(p); }

int fast_fft_size(int min_size) {
    int n = std::max(min_size + (min_size & 1), 2);
    for (;; n += 2) {
        int r = n;
        for (int f : {2, 3, 5})
            while (r % f == 0) r /= f;
        if (r == 1) return n;
    }
}

void real_fft(std::span<const float> input, int fft_size, std::span<std::complex<float>> out) {
    assert(fft_size % 2 == 0 && static_cast<std::size_t>(fft_size) >= input.size());
    const auto n = static_cast<std::size_t>(fft_size);
    assert(out.size() == n / 2 + 1);
    const std::unique_ptr<float, fftw_free_buffer> in(fftwf_alloc_real(n));
    const std::unique_ptr<float, fftw_free_buffer> spectrum(fftwf_alloc_real(n + 2));  // n / 2 + 1 complex
    if (!in || !spectrum) throw std::bad_alloc();
    auto* const bins_out = reinterpret_cast<fftwf_complex*>(spectrum.get());  // NOLINT(cppcoreguidelines-pro-type-reinterpret-cast): FFTW's complex is float[2]
    // The size's one plan for the process (shared_forward_plan), executed on this call's own
    // buffers: the same plan each time, without its planning (the heard spectrum's 384000 points
    // at its former 8x padding: about 8 M instructions, mostly its twiddle factors) after the first.
    fftwf_plan plan = shared_forward_plan(fft_size, in.get(), bins_out);
    if (plan == nullptr) throw std::bad_alloc();
    std::copy(input.begin(), input.end(), in.get());
    std::fill(in.get() + input.size(), in.get() + n, 0.0f);
    fftwf_execute_dft_r2c(plan, in.get(), bins_out);
    const float* bins = spectrum.get();  // re, im interleaved
    for (std::size_t k = 0; k < out.size(); ++k) out[k] = {bins[2 * k], bins[2 * k + 1]};
}

void inverse_real_fft::fftw_buffer_free::operator()(void* p) const { fftwf_free(p); }

inverse_real_fft::inverse_real_fft(int fft_size) : size_(fft_size) {
    assert(fft_size % 2 == 0 && fft_size >= 2);
    const auto n = static_cast<std::size_t>(fft_size);
    spectrum_.reset(reinterpret_cast<std::complex<float>*>(fftwf_alloc_complex(n / 2 + 1)));  // NOLINT(cppcoreguidelines-pro-type-reinterpret-cast): FFTW's complex is float[2]
    samples_.reset(fftwf_alloc_real(n));
    if (!spectrum_ || !samples_) throw std::bad_alloc();
    // One plan per size for the process, guarded by the planner lock. Never destroyed: a worker
    // may still run one while the process exits, and the map stays reachable from this pointer,
    // so the leak checker counts nothing (a static map's destructor, which left the plans
    // unreachable without destroying them, was reported as a leak at every exit).
    static auto* const plans = new std::map<int, fftwf_plan>();
    const std::lock_guard<std::mutex> hold(planner_lock());
    fftwf_plan& plan = (*plans)[fft_size];
    if (plan == nullptr) {
        import_stored_wisdom(fft_size, true);
        plan = fftwf_plan_dft_c2r_1d(fft_size, reinterpret_cast<fftwf_complex*>(spectrum_.get()), samples_.get(),  // NOLINT(cppcoreguidelines-pro-type-reinterpret-cast)
                                     fft_planner_flags);
    }
    if (plan == nullptr) throw std::bad_alloc();
    plan_ = plan;
}

void inverse_real_fft::run(std::span<float> out) {
    assert(out.size() == static_cast<std::size_t>(size_));
    fftwf_execute_dft_c2r(plan_, reinterpret_cast<fftwf_complex*>(spectrum_.get()), samples_.get());  // NOLINT(cppcoreguidelines-pro-type-reinterpret-cast)
    std::copy_n(samples_.get(), out.size(), out.begin());
}

stft_plan::stft_plan(const stft_config& config)
    : config_(config),
      window_(make_window(config.window, config.window_length, window_symmetry::symmetric)) {
    assert(config.window_length % 2 == 1 && config.window_length >= 3);
    assert(config.fft_size % 2 == 0 && config.fft_size >= config.window_length);
    const double sum_w = std::accumulate(window_.begin(), window_.end(), 0.0);
    amp_scale_ = 2.0 / sum_w;
    const auto n = static_cast<std::size_t>(config.fft_size);
    frame_.reset(fftwf_alloc_real(n));
    spectrum_.reset(reinterpret_cast<float*>(fftwf_alloc_complex(n / 2 + 1)));  // NOLINT(cppcoreguidelines-pro-type-reinterpret-cast): FFTW's complex is float[2]
    power_spectrum_.reset(reinterpret_cast<float*>(fftwf_alloc_complex(n / 2 + 1)));  // NOLINT(cppcoreguidelines-pro-type-reinterpret-cast)
    if (!frame_ || !spectrum_ || !power_spectrum_) throw std::bad_alloc();
    bin_count_ = n / 2 + 1;
    // bins() shows the spectrum before any frame: zeros, as before.
    std::fill_n(spectrum_.get(), 2 * bin_count_, 0.0f);
    std::fill_n(frame_.get(), n, 0.0f);
    if (config.few_frames) {
        kiss_.reset(kiss_fftr_alloc(config.fft_size, 0, nullptr, nullptr));
        if (!kiss_) throw std::bad_alloc();
    } else {
        plan_ = shared_forward_plan(config.fft_size, frame_.get(), reinterpret_cast<fftwf_complex*>(spectrum_.get()));  // NOLINT(cppcoreguidelines-pro-type-reinterpret-cast)
        if (plan_ == nullptr) throw std::bad_alloc();
    }
    power_.resize(bin_count_);
}

stft_plan::~stft_plan() = default;  // plan_ is the process's (shared_forward_plan)

void stft_plan::transform(std::span<const float> samples, std::int64_t centre, float dc_offset, float* out) {
    const std::int64_t h = half_length();
    const std::int64_t size = static_cast<std::int64_t>(samples.size());
    const std::int64_t m_size = config_.fft_size;
    const float* w = window_.data() + h;  // w[m], m = -h..h
    float* buf = frame_.get();
    // Zero padding sits between the two halves (indices h+1 .. M-h-1); written once, never touched.
    if (centre - h >= 0 && centre + h < size) {
        // Interior frame: two straight multiply loops.
        const float* x = samples.data() + centre;
        const auto half = static_cast<std::size_t>(h);
        window_samples_into(buf, w, x, dc_offset, half + 1);                 // m = 0..h
        window_samples_into(buf + m_size - h, w - h, x - h, dc_offset, half);  // m = -h..-1
    } else {
        for (std::int64_t m = -h; m <= h; ++m) {
            const std::int64_t n = centre + m;
            const float x = (n >= 0 && n < size) ? samples[n] - dc_offset : 0.0f;
            buf[m >= 0 ? m : m_size + m] = w[m] * x;
        }
    }
    if (kiss_) {
        // kiss_fft_cpx is two floats, as FFTW's complex: the same interleaved output.
        kiss_fftr(kiss_.get(), buf, reinterpret_cast<kiss_fft_cpx*>(out));  // NOLINT(cppcoreguidelines-pro-type-reinterpret-cast)
        return;
    }
    // FFTW's new-array execute on out: both outputs are FFTW-aligned as the planned one.
    fftwf_execute_dft_r2c(plan_, buf, reinterpret_cast<fftwf_complex*>(out));  // NOLINT(cppcoreguidelines-pro-type-reinterpret-cast)
}

void stft_plan::set_power(const float* spectrum) {
    power_of_bins(power_.data(), spectrum, static_cast<float>(amp_scale_ * amp_scale_), power_.size());
}

// The bins are the FFT's output itself (bins()); the frame loop read a copy of them before
// (callgrind, `wane analyze` of the synthetic note: stft_plan::analyze 40.22 -> 39.34 M instructions).
void stft_plan::analyze(std::span<const float> samples, std::int64_t centre, float dc_offset) {
    transform(samples, centre, dc_offset, spectrum_.get());
    set_power(spectrum_.get());
}

void stft_plan::analyze_power(std::span<const float> samples, std::int64_t centre) {
    transform(samples, centre, 0.0f, power_spectrum_.get());
    set_power(power_spectrum_.get());
}

}  // namespace wane

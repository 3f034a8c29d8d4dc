// Short-time Fourier transform of real samples on FFTW's single-precision real FFT, zero-phase
// windowed (bins in KissFFT's complex type, which the peak picker reads).
#pragma once

#include <kiss_fftr.h>

#include <complex>
#include <cstdint>
#include <memory>
#include <optional>
#include <span>
#include <vector>

#include "spectrum/window.hpp"

struct fftwf_plan_s;  // fftw3.h's plan (kept out of this header)

namespace wane {

struct stft_config {
    window_kind window = window_kind::blackman_harris_4;
    int window_length = 2049;  ///< samples, odd (a centre sample)
    int fft_size = 4096;       ///< even, >= 2 x window_length (zero padding >= 2)
    /// A plan for a handful of frames: KissFFT, whose set-up is its twiddle table (~0.2 ms at
    /// 19440), instead of FFTW's planner search (2-3 ms per new size, more than a few frames cost).
    /// A size with stored FFTW choices (spectrum/fft_planning.hpp) plans for less than that table:
    /// the tracker's survey, which used this, now runs on FFTW.
    bool few_frames = false;
};

/// Smallest even FFT size >= min_size whose factors are only 2, 3 and 5 (KissFFT's fast radices).
int fast_fft_size(int min_size);

/// One real block's spectrum on FFTW single precision (FFTW_ESTIMATE, no buffered solvers; one
/// plan per size for the process, made under the STFT's planner lock on first use and executed on
/// each call's own buffers, as inverse_real_fft's): input zero padded to fft_size (even, >=
/// input.size()), bins 0 .. fft_size / 2 written to out (fft_size / 2 + 1 of them), unscaled.
/// For one-off transforms of a whole span.
void real_fft(std::span<const float> input, int fft_size, std::span<std::complex<float>> out);

/// The unnormalized inverse real FFT of one size on FFTW single precision (FFTW_ESTIMATE, no
/// buffered solvers): the caller writes bins 0 .. fft_size / 2 into spectrum() (the imaginary
/// parts of bin 0 and of the last bin are not read), run() writes the fft_size samples
/// y[n] = sum over the Hermitian spectrum of X[k] e^(+j 2 pi k n / N) into out and leaves
/// spectrum() undefined. One plan per size for the process, made under the STFT's planner lock on
/// first use and executed on each object's own buffers (FFTW's new-array execute is thread-safe),
/// so making one costs no planning after the first; one object per thread.
class inverse_real_fft {
public:
    explicit inverse_real_fft(int fft_size);
    std::span<std::complex<float>> spectrum() { return {spectrum_.get(), static_cast<std::size_t>(size_ / 2 + 1)}; }
    void run(std::span<float> out);

private:
    struct fftw_buffer_free {
        void operator()(void* p) const;
    };
    int size_ = 0;
    fftwf_plan_s* plan_ = nullptr;  ///< shared, never destroyed
    std::unique_ptr<std::complex<float>, fftw_buffer_free> spectrum_;  ///< fft_size / 2 + 1 (FFTW-aligned)
    std::unique_ptr<float, fftw_buffer_free> samples_;                 ///< fft_size (FFTW-aligned)
};

/// One STFT frame at a time. Made once per thread: the FFT state, window and buffers are allocated
/// here and reused, so analyzing a frame allocates nothing. The FFTW plan is made (FFTW_ESTIMATE:
/// no timing, the same plan every run; without the buffered solvers, which it would not pick) and destroyed under one process-wide lock, since FFTW's
/// planner is not thread-safe; executing it is.
///
/// Frame at centre sample c: buffer[m mod M] = w[h + m] x[c + m], m = -h..h (zero phase), so the
/// phase of bin k is the phase of the signal at the centre sample. Samples outside the input read
/// as 0. Amplitude scale: |X[k]| * 2 / sum(w) = A for a sinusoid A cos(...) centred on bin k, so a
/// full-scale sinusoid reads 0 dBFS at its peak.
class stft_plan {
public:
    explicit stft_plan(const stft_config& config);
    ~stft_plan();
    stft_plan(const stft_plan&) = delete;
    stft_plan& operator=(const stft_plan&) = delete;

    /// Transforms the frame centred at sample `centre` (dc_offset subtracted from every sample);
    /// then bins() and power() describe it.
    void analyze(std::span<const float> samples, std::int64_t centre, float dc_offset = 0.0f);
    /// The same frame for power() only: bins() are left as they were (the FFT writes a buffer of
    /// its own, not the one bins() shows).
    void analyze_power(std::span<const float> samples, std::int64_t centre);

    /// Raw FFT bins (fft_size / 2 + 1), unscaled: the FFT's own output, not a copy (kiss_fft_cpx
    /// is two floats, as FFTW's complex).
    std::span<const kiss_fft_cpx> bins() const {
        return {reinterpret_cast<const kiss_fft_cpx*>(spectrum_.get()), bin_count_};  // NOLINT(cppcoreguidelines-pro-type-reinterpret-cast)
    }
    /// |X[k]|^2 * amp_scale()^2: squared amplitude of a sinusoid centred on bin k (fft_size/2 + 1).
    std::span<const float> power() const { return power_; }

    int fft_size() const { return config_.fft_size; }
    int window_length() const { return config_.window_length; }
    int half_length() const { return config_.window_length / 2; }
    window_kind window() const { return config_.window; }
    std::span<const float> window_samples() const { return window_; }
    /// 2 / sum(w): FFT magnitude to sinusoid amplitude.
    double amp_scale() const { return amp_scale_; }
    /// The QIFFT correction of this window and FFT size, made on first use (the plans that only
    /// measure power, the noise model's, never need it).
    const qifft_correction& correction() const {
        if (!correction_) correction_.emplace(made_qifft_correction(config_.window, config_.window_length, config_.fft_size));
        return *correction_;
    }

private:
    /// Windows the frame into the FFT input and runs the FFT, its output (fft_size / 2 + 1
    /// complex values, re and im interleaved) written to out: spectrum_ or power_spectrum_.
    void transform(std::span<const float> samples, std::int64_t centre, float dc_offset, float* out);
    /// |X[k]|^2 amp_scale()^2 of the interleaved bins in `spectrum` into power_.
    void set_power(const float* spectrum);
    stft_config config_;
    std::vector<float> window_;
    double amp_scale_ = 0.0;
    mutable std::optional<qifft_correction> correction_;  // one plan per thread: no lock needed
    struct fftw_buffer_free {
        void operator()(void* p) const;
    };
    fftwf_plan_s* plan_ = nullptr;  ///< the size's plan for the process (stft.cpp: shared_forward_plan); null with few_frames
    struct kiss_free {
        void operator()(kiss_fftr_cfg cfg) const { kiss_fftr_free(cfg); }
    };
    std::unique_ptr<kiss_fftr_state, kiss_free> kiss_;  ///< with few_frames
    std::unique_ptr<float, fftw_buffer_free> frame_;      ///< fft_size real inputs (FFTW-aligned)
    std::unique_ptr<float, fftw_buffer_free> spectrum_;   ///< fft_size / 2 + 1 complex outputs: bins()
    std::unique_ptr<float, fftw_buffer_free> power_spectrum_;  ///< the same for analyze_power
    std::size_t bin_count_ = 0;                           ///< fft_size / 2 + 1
    std::vector<float> power_;
};

}  // namespace wane

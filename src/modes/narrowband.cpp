#include "modes/narrowband.hpp"

#include <kiss_fft.h>

#include <algorithm>
#include <cassert>
#include <cmath>
#include <map>
#include <memory>
#include <new>

#include "core/units.hpp"
#include "spectrum/stft.hpp"

namespace wane {

namespace {

/// KissFFT's inverse complex plan of one size, made on first use and kept for the thread: the
/// bands of a note come in a few sizes, and a plan's twiddle table (a cosine and sine per point)
/// cost about as much as its transform (the same table every time, so the same transform).
kiss_fft_cfg inverse_plan(int points) {
    struct kiss_free {
        void operator()(kiss_fft_state* cfg) const { kiss_fft_free(cfg); }
    };
    thread_local std::map<int, std::unique_ptr<kiss_fft_state, kiss_free>> plans;
    auto& plan = plans[points];
    if (!plan) plan.reset(kiss_fft_alloc(points, 1, nullptr, nullptr));  // inverse: exp(+i ...)
    if (!plan) throw std::bad_alloc();
    return plan.get();
}

}  // namespace

struct note_spectrum::state {
    double sample_rate_hz = 0.0;
    std::size_t signal_frames = 0;
    int fft_size = 0;
    std::vector<std::complex<float>> bins;
};

note_spectrum::note_spectrum(std::span<const float> x, double sample_rate_hz, std::size_t padded_frames)
    : state_(std::make_unique<state>()) {
    assert(sample_rate_hz > 0.0 && !x.empty() && (padded_frames == 0 || padded_frames >= x.size()));
    state_->sample_rate_hz = sample_rate_hz;
    state_->signal_frames = std::max(padded_frames, x.size());
    const int size = fast_fft_size(static_cast<int>(state_->signal_frames));
    assert(size % 2 == 0);
    state_->fft_size = size;
    // FFTW (spectrum/real_fft: one plan per size for the process, from the stored wisdom): a
    // note-long size's twiddle factors cost KissFFT's allocation about as much as its transform.
    state_->bins.resize(static_cast<std::size_t>(size) / 2 + 1);
    real_fft(x, size, state_->bins);
}

note_spectrum::~note_spectrum() = default;

double note_spectrum::duration_s() const {
    return static_cast<double>(state_->signal_frames) / state_->sample_rate_hz;
}

int note_spectrum::fft_size() const { return state_->fft_size; }

std::vector<std::complex<double>> note_spectrum::bins_between(double low_hz, double high_hz, long& first_bin) const {
    const state& s = *state_;
    const double bin_hz = s.sample_rate_hz / static_cast<double>(s.fft_size);
    const auto last_bin = static_cast<long>(s.bins.size()) - 1;
    const long lo = std::clamp(static_cast<long>(std::ceil(low_hz / bin_hz)), 1L, last_bin);
    const long hi = std::clamp(static_cast<long>(std::floor(high_hz / bin_hz)), 1L, last_bin);
    first_bin = lo;
    std::vector<std::complex<double>> out;
    for (long k = lo; k <= hi; ++k) out.emplace_back(s.bins[static_cast<std::size_t>(k)].real(), s.bins[static_cast<std::size_t>(k)].imag());
    return out;
}

double note_spectrum::energy_between(double low_hz, double high_hz) const {
    long first_bin = 0;
    double sum = 0.0;
    for (const std::complex<double>& b : bins_between(low_hz, high_hz, first_bin)) sum += std::norm(b);
    // sum_n x^2 = (1 / M) sum over all M bins |X_k|^2: each positive bin stands for two.
    return 2.0 * sum / static_cast<double>(state_->fft_size);
}

narrowband note_spectrum::band(double centre_hz, double half_width_hz, double min_rate_hz) const {
    const state& s = *state_;
    const double bin_hz = s.sample_rate_hz / static_cast<double>(s.fft_size);
    const auto kc = static_cast<long>(std::lround(centre_hz / bin_hz));
    const auto half = std::max<long>(1, static_cast<long>(std::ceil(half_width_hz / bin_hz)));
    const auto last_bin = static_cast<long>(s.bins.size()) - 1;
    if (kc - half < 1 || kc + half > last_bin) return {};
    // P: a fast size giving at least min_rate_hz and room for the 2 half + 1 bins.
    const double want = std::max(min_rate_hz / bin_hz, static_cast<double>(2 * half + 2));
    const int points = fast_fft_size(static_cast<int>(std::ceil(want)));
    std::vector<kiss_fft_cpx> in(static_cast<std::size_t>(points), kiss_fft_cpx{0.0f, 0.0f});
    const double scale = 1.0 / static_cast<double>(s.fft_size);
    for (long j = -half; j <= half; ++j) {
        // Flat over the inner half, raised cosine to 0 at the band edge.
        const double r = std::abs(static_cast<double>(j)) / static_cast<double>(half);
        const double taper = r <= 0.5 ? 1.0 : 0.5 * (1.0 + std::cos(pi * (r - 0.5) / 0.5));
        const std::complex<float> b = s.bins[static_cast<std::size_t>(kc + j)];
        const auto slot = static_cast<std::size_t>((j + points) % points);
        in[slot] = {static_cast<float>(double(b.real()) * taper * scale), static_cast<float>(double(b.imag()) * taper * scale)};
    }
    std::vector<kiss_fft_cpx> out(static_cast<std::size_t>(points));
    kiss_fft(inverse_plan(points), in.data(), out.data());
    narrowband nb{.centre_hz = static_cast<double>(kc) * bin_hz,
                  .sample_rate_hz = static_cast<double>(points) * bin_hz,
                  .y = std::vector<std::complex<double>>(static_cast<std::size_t>(points))};
    for (std::size_t m = 0; m < out.size(); ++m) nb.y[m] = {out[m].r, out[m].i};
    return nb;
}

}  // namespace wane

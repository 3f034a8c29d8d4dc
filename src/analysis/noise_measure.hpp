// The noise model's measurement (analysis/noise_model.hpp says what is measured and why): the
// band plans (window, hop, the bins each band takes) and the streamed STFT that turns a residual
// into one level track per band. Used by analysis/noise_model.cpp only.
#pragma once

#include <cstddef>
#include <functional>
#include <span>
#include <utility>
#include <vector>

#include "analysis/band_leakage.hpp"
#include "analysis/noise_model.hpp"
#include "core/noise_bands.hpp"
#include "core/units.hpp"
#include "spectrum/stft.hpp"

namespace wane {

/// A level that stands for digital silence, dB.
inline constexpr double noise_silence_db = -200.0;

/// Fills dest with residual samples [first, first + dest.size()) (all inside the residual).
using residual_source = std::function<void(std::size_t first, std::span<float> dest)>;

/// One STFT measurement of the bands: the window, hop, span and each band's bins.
struct band_plan {
    window_kind window = window_kind::hann;
    double window_s = 0.0;
    double hop_s = 0.0;
    double span_s = 0.0;  ///< frames centred before this; 0 = the whole residual
    bool median = false;  ///< median of the bins scaled to the mean (else their mean)
    double widest_bin_hz = 0.0;  ///< pad (up to zero_padding) to bins no wider; 0: pad fully
    /// Frames centred after this many seconds are measured only every sparse_hops-th (and the
    /// last); the levels between are interpolated in dB (infinity: every frame measured).
    double dense_span_s = infinity;
    int sparse_hops = 1;
    std::vector<band_edges> bands;
    std::vector<std::vector<int>> bins;  ///< bins measured per band
    std::vector<int> band_total_bins;    ///< all bins inside each band (the band power's K)
    std::vector<std::pair<int, int>> ranges;  ///< first and last bin inside each band
    std::vector<std::vector<band_leak>> leak;  ///< what each band's bins take from the others
};

/// The floor measurement: bins away from every partial, borrowed from nearby when too few.
band_plan floor_plan(double sample_rate_hz, std::span<const double> partial_freqs_hz, double f0_hz,
                     const noise_model_params& params);

/// The attack measurement: all bins of the bands wide enough for the short window.
band_plan attack_plan(double sample_rate_hz, const noise_model_params& params);

/// The STFT a band plan measures with (its window and FFT size).
stft_config plan_config(const band_plan& plan, double sample_rate_hz);

/// How many of the residual's first samples measure_bands reads (frames centred before until_s;
/// half_length: half the plan's window, in samples).
std::size_t measure_read_end(std::size_t total, double sample_rate_hz, const band_plan& bp, int half_length,
                             double until_s = infinity);

/// The band measurement over a residual of `total` samples read through `source` (frames centred
/// before until_s seconds only), with plan made from plan_config(bp) (one per band plan, shared by
/// its sources). Frames are analysed in order; the samples each needs are fetched
/// into a buffer that slides forward, so only one buffer of residual is held. Frames near the ends
/// read zeros outside the residual, exactly as stft_plan does on the whole residual.
std::vector<noise_band_track> measure_bands(std::size_t total, const residual_source& source, double sample_rate_hz,
                                            const band_plan& bp, stft_plan& plan, double until_s = infinity);

}  // namespace wane

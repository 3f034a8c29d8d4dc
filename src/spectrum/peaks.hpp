// Spectral peaks of one STFT frame: thresholds, a running noise floor per frequency band, and QIFFT.
#pragma once

#include <complex>
#include <span>
#include <vector>

#include <kiss_fft.h>

#include "spectrum/window.hpp"

namespace wane {

struct noise_floor_params {
    double band_hz = 250.0;     ///< width of one floor band (widened to min_band_bins when coarser)
    int min_band_bins = 24;
    /// Quantile of the band's bin powers taken as its noise estimate; low so the partials' main
    /// lobes in the band do not lift it.
    double quantile = 0.2;
    double smoothing_s = 0.08;  ///< time constant of the running average (dB domain)
    double max_update_s = 0.02; ///< re-measure at least this often (every frame for hops above)
};

/// Running noise-floor estimate per frequency band. Levels are mean noise power per bin on the
/// STFT's sinusoid scale (a sinusoid of that dBFS would peak at the floor).
class noise_floor {
public:
    noise_floor(int bin_count, double bin_hz, double hop_s, const noise_floor_params& params = {});

    /// Folds in one frame of bin powers (bin_count values).
    void update(std::span<const float> power);
    /// Sets every band from one frame, without smoothing (first frame or a single spectrum).
    void reset(std::span<const float> power);

    double floor_db_at(double freq_hz) const;
    /// The floor of band b as a power (10^(dB / 10)), kept beside the dB values.
    double band_power(std::size_t b) const { return bands_power_[b]; }
    std::size_t band_of(double freq_hz) const;
    double band_hz() const { return band_bins_ * bin_hz_; }
    std::span<const double> bands_db() const { return bands_db_; }

private:
    void measure(std::span<const float> power);
    int bin_count_;
    double bin_hz_;
    int band_bins_;
    int update_interval_;
    int frames_since_ = 0;
    double alpha_;
    double quantile_;
    double mean_over_quantile_;  ///< exponential distribution: mean = q-quantile / -ln(1 - q)
    bool started_ = false;
    void refresh_power();
    std::vector<double> bands_db_;
    std::vector<double> bands_power_;
    std::vector<double> measured_db_;
    std::vector<float> scratch_;
    std::vector<float> select_scratch_;
    std::vector<float> lanes_;  ///< whole bands' values side by side (select_small_ranks)
};

struct spectral_peak {
    double freq_hz = 0.0;
    double level_db = 0.0;   ///< dBFS, sinusoid scale
    double phase_rad = 0.0;  ///< phase of cos at the frame centre
    double floor_db = 0.0;   ///< noise floor at this frequency
    std::size_t bin = 0;      ///< the local maximum's FFT bin
    double offset_bins = 0.0; ///< the QIFFT offset from it (freq_hz = (bin + offset_bins) x bin spacing)
};

/// The phase of a peak at `bin` + `offset_bins` from a zero-phase frame's raw bins: linear between
/// the bin's and its neighbour's on the side of the true peak (find_peaks' phase_rad).
double peak_phase_rad(std::span<const kiss_fft_cpx> bins, std::size_t bin, double offset_bins);

struct peak_params {
    double min_freq_hz = 20.0;
    double max_freq_hz = 0.0;        ///< 0: 0.95 x Nyquist
    double below_max_db = 90.0;      ///< ignore peaks this far below the frame's strongest bin
    double abs_floor_db = -130.0;    ///< ignore peaks below this dBFS
    double above_floor_db = 6.0;     ///< a peak must stand this far above the noise floor
};

/// Local maxima of `power` (sinusoid scale) passing the thresholds, interpolated with the window's
/// QIFFT correction. `bins` (same length, raw FFT) gives the phase; pass an empty span to skip it
/// (peak_phase_rad gives it later, for the peaks that need one).
void find_peaks(std::span<const float> power, std::span<const kiss_fft_cpx> bins,
                const qifft_correction& correction, int fft_size, double sample_rate_hz,
                const noise_floor* floor, const peak_params& params, std::vector<spectral_peak>& out);

}  // namespace wane

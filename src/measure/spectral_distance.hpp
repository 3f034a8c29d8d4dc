// Spectral distances between a reference and another signal already aligned sample for sample:
// multi-resolution log-spectral distance and spectral convergence over STFT magnitudes.
#pragma once

#include <cstddef>
#include <span>
#include <vector>

namespace wane {

struct spectral_distance_params {
    /// STFT sizes; every one uses a periodic Hann window of that length and hop = size / hop_divisor.
    std::vector<int> fft_sizes = {512, 1024, 2048, 4096};
    int hop_divisor = 4;
    /// Only bins whose reference power is within range_db of the reference's peak bin (over all
    /// frames of that resolution in the time range) enter the log-spectral distance.
    double range_db = 60.0;
    /// Bin levels of both signals are floored this far below the reference peak before the
    /// difference, so a silent bin gives a large but finite difference.
    double floor_db = 100.0;
    /// Time range: frames whose centre lies in [start_frames, end_frames); end 0 = to the end of
    /// the reference. Samples outside either signal read as zero.
    std::size_t start_frames = 0;
    std::size_t end_frames = 0;
    /// Only bins at or below this fraction of the Nyquist frequency count (both measures), e.g.
    /// to leave out the band a copy made at a lower rate cannot hold.
    double band_limit_fraction = 1.0;
};

struct resolution_distance {
    int fft_size = 0;
    int hop_frames = 0;
    std::size_t stft_frames = 0;  ///< STFT frames evaluated
    std::size_t bins_used = 0;    ///< (frame, bin) pairs within range_db of the peak
    double log_spectral_distance_db = 0.0;
    double spectral_convergence = 0.0;
};

struct spectral_distance_result {
    /// Mean over the resolutions of each one's log-spectral distance:
    ///   LSD = sqrt( mean over used (frame, bin) of (10 log10 P_ref - 10 log10 P_other)^2 )  [dB]
    double log_spectral_distance_db = 0.0;
    /// Mean over the resolutions of || |S_ref| - |S_other| ||_F / || |S_ref| ||_F over all bins
    /// and frames in the range (dimensionless; 0 = identical magnitudes).
    double spectral_convergence = 0.0;
    std::vector<resolution_distance> per_resolution;
};

/// Both signals at the same rate and aligned (index n is the same instant in both).
/// Throws std::invalid_argument for an FFT size that is not even and >= 16, or an empty range.
spectral_distance_result spectral_distance(std::span<const float> reference, std::span<const float> other,
                                           const spectral_distance_params& params = {});

}  // namespace wane

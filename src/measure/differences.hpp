// Where a copy differs from its recording: both signals' power in coarse cells (third-octave
// bands x time spans from the onset), the difference in dB per cell, and the largest connected
// regions of same-signed difference. One channel at a time: a stereo caller runs it per channel.
#pragma once

#include <cstddef>
#include <span>
#include <vector>

namespace wane {

struct difference_params {
    double window_s = 0.020;   ///< Hann window of the STFT the cells sum
    double hop_s = 0.0025;     ///< STFT hop
    /// Time edges in seconds from the recording's onset; the last cell runs on to the end of the
    /// recording (a cell that starts past the end is dropped).
    std::vector<double> time_edges_s = {0.0, 0.02, 0.05, 0.1, 0.2, 0.5, 1.0, 2.0, 4.0, 8.0, 16.0, 32.0, 64.0};
    /// Cells where both signals are quieter than this far below the recording's loudest cell are
    /// not counted (their difference is noise against noise).
    double range_db = 50.0;
    /// Both levels are floored this far below the recording's loudest cell before the difference,
    /// so a silent cell gives a large but finite difference.
    double floor_db = 80.0;
    /// A region is reported when its cells differ by at least this much (common practice for "clearly
    /// audible level difference" in listening tests, no source).
    double threshold_db = 3.0;
    /// Bands starting at or above this are not counted (a copy made at a lower rate holds nothing
    /// there); 0 = up to the Nyquist frequency.
    double max_freq_hz = 0.0;
};

/// Power per cell. Cell (band i, time j) at index j * bands + i. Bands are third-octave bands
/// (base-2, centres 1000 * 2^(k/3) Hz; edges at centre * 2^(+-1/6)) from the one holding 25 Hz
/// to the one holding the Nyquist frequency (its top clipped there); the lowest band also takes
/// every bin below it.
struct difference_cells {
    std::vector<double> band_edges_hz;  ///< bands + 1 edges, ascending
    std::vector<double> time_edges_s;   ///< times + 1 edges from the onset, the last = end of a
    int bands = 0;
    int times = 0;
    std::vector<double> a_db;     ///< recording: mean power over the cell's frames of the summed bins [dB re full-scale sine]
    std::vector<double> b_db;     ///< copy, the same
    std::vector<double> diff_db;  ///< b - a after flooring (positive: the copy is louder)
    std::vector<unsigned char> counted;  ///< 1 when either level is within range_db of a's loudest cell
    double loudest_db = 0.0;      ///< a's loudest cell
    std::size_t at(int band, int time) const {
        return static_cast<std::size_t>(time) * static_cast<std::size_t>(bands) + static_cast<std::size_t>(band);
    }
};

/// a is the recording, b the copy aligned to it (b[n] is the same instant as a[n]); onset_frames
/// is the recording's onset. Cells hold the frames whose centre lies in the cell's time span.
difference_cells difference_grid(std::span<const float> a, std::span<const float> b, double sample_rate_hz,
                                 std::size_t onset_frames, const difference_params& params = {});

/// A connected set of counted cells of one sign, described by its bounding box.
struct difference_region {
    int band_first = 0, band_last = 0;  ///< band indices, inclusive
    int time_first = 0, time_last = 0;  ///< time cell indices, inclusive
    double low_hz = 0.0, high_hz = 0.0; ///< edges of the bounding box
    double from_s = 0.0, to_s = 0.0;    ///< from the onset
    bool to_end = false;                ///< to_s is the end of the recording
    double mean_diff_db = 0.0;          ///< mean of the cells' differences (copy minus recording)
    double largest_diff_db = 0.0;       ///< the seed cell's difference
    int cells = 0;
};

/// Regions by decreasing |largest_diff_db|: each grows from the largest unclaimed cell over
/// counted 4-neighbours of the same sign whose difference is at least threshold_db (a connected
/// component of such cells); at most max_regions.
std::vector<difference_region> largest_differences(const difference_cells& cells, const difference_params& params,
                                                   std::size_t max_regions);

/// Time from the onset to the first 1 ms frame whose RMS level (2 ms window) is within 3 dB of
/// the loudest frame of the first 200 ms after the onset: how long the attack takes, in s.
double onset_rise_s(std::span<const float> x, double sample_rate_hz, std::size_t onset_frames);

}  // namespace wane

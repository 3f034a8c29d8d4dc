// Leakage between neighbouring noise bands in one STFT band measurement (analysis/noise_model).
//
// A window's main lobe and sidelobes carry a loud band's noise into the bins of the band beside
// it: with the floor measurement's Blackman-Harris window (main lobe +-4 bins, Harris 1978) a
// one-third-octave band at a few hundred hertz is hardly wider than the lobe, so a band 30 dB
// under its neighbour cannot be told from the neighbour's skirt. For noise of two-sided power
// density S(f) the expected power of bin k is sum_j S_j P(k - j) / sum_d P(d) * sum(w^2) (P the
// window's padded power response |W(d / N)|^2, the sum over the padded bins j, Parseval), so
// band n of mean bin power s_n puts c_bn s_n into band b's measured bins, with
//     c_bn = stat over b's measured bins k of  sum_{j in band n} P(k - j) / sum_d P(d)
// (stat: the median when the measurement takes the bins' median, else the mean). In band power
// (core/noise_bands.hpp: band power = mean bin power * 2 K / (N sum(w^2))) that is
//     leak_b = sum_n c_bn * power_n * K_b / K_n.
// The noise model takes leak_b as the floor under band b: a band level within the fit's margin of
// it is the neighbours' skirt, not noise of the band's own.
#pragma once

#include <cstddef>
#include <span>
#include <utility>
#include <vector>

namespace wane {

struct band_leak {
    std::size_t from = 0;      ///< the leaking band's index
    double coefficient = 0.0;  ///< c_bn above
};

/// c_bn for every band b (index into bins/ranges) from every other band n (pairs with c_bn above
/// 1e-12 only). window: the unpadded analysis window; fft_size: the padded DFT length; bins[b]:
/// the bins band b measures; ranges[b]: the first and last bin inside band b (its K bins).
std::vector<std::vector<band_leak>> band_leakage(std::span<const float> window, int fft_size,
                                                 const std::vector<std::vector<int>>& bins,
                                                 const std::vector<std::pair<int, int>>& ranges, bool median);

/// Which leaking bands leakage_levels_db counts, and how.
enum class leak_sources {
    all,     ///< every band, c_bn s_n
    skirts,  ///< the bands not marked as spread noise, c_bn s_n
    spread,  ///< the bands marked as spread noise, net of b's own density (below)
};

/// leak_b per frame in dB (as the band levels), from the bands' measured levels per frame
/// (level_db[n][i], dB of band power) and their bin counts K. A band n marked in spread holds
/// noise spread over its width: band b's measured bins then hold s_b (1 - sum_n c_bn) +
/// sum_n c_bn s_n, so what n adds over b's own density s_b is c_bn max(0, s_n - s_b) (nothing
/// from a neighbour no denser than b). A partial's narrow skirt is counted whole, c_bn s_n.
std::vector<std::vector<float>> leakage_levels_db(const std::vector<std::vector<band_leak>>& leak,
                                                  const std::vector<std::span<const float>>& level_db,
                                                  std::span<const int> band_total_bins,
                                                  leak_sources sources = leak_sources::all,
                                                  const std::vector<bool>& spread = {});

}  // namespace wane

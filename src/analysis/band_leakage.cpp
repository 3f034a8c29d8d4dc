#include "analysis/band_leakage.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>

#include "core/units.hpp"
#include "spectrum/window.hpp"

namespace wane {

namespace {

/// Padded offsets over which the power response is summed: 16 unpadded bins each side holds the
/// main lobe and the loud first sidelobes of the windows used (Hann: -31 dB first sidelobe falling
/// 18 dB per octave; Blackman-Harris: main lobe +-4 bins, sidelobes under -92 dB; Harris 1978).
constexpr double reach_unpadded_bins = 16.0;
/// Couplings below this are left out (-120 dB).
constexpr double least_coefficient = 1e-12;
/// Level that stands for no leakage at all, dB.
constexpr float no_leak_db = -200.0F;

/// P(d) = |sum_n w[n] e^{-j 2 pi d n / N}|^2 for d = 0 .. reach (symmetric in d for a real
/// window): the squared zero-phase transform of the odd-length symmetric window (the centre's
/// phase factor has modulus 1; spectrum/window.hpp).
std::vector<double> power_response(std::span<const float> window, int fft_size, int reach) {
    std::vector<double> p(static_cast<std::size_t>(reach) + 1);
    for (int d = 0; d <= reach; ++d) {
        const double w = zero_phase_transform(window, fft_size, static_cast<double>(d));
        p[static_cast<std::size_t>(d)] = w * w;
    }
    return p;
}

}  // namespace

std::vector<std::vector<band_leak>> band_leakage(std::span<const float> window, int fft_size,
                                                 const std::vector<std::vector<int>>& bins,
                                                 const std::vector<std::pair<int, int>>& ranges, bool median) {
    assert(bins.size() == ranges.size() && !window.empty());
    const int reach = std::min(fft_size / 2, static_cast<int>(std::ceil(reach_unpadded_bins * fft_size /
                                                                         static_cast<double>(window.size()))));
    const std::vector<double> p = power_response(window, fft_size, reach);
    double total = p[0];
    for (int d = 1; d <= reach; ++d) total += 2.0 * p[static_cast<std::size_t>(d)];
    auto response = [&](int d) { return std::abs(d) <= reach ? p[static_cast<std::size_t>(std::abs(d))] : 0.0; };

    std::vector<std::vector<band_leak>> leak(bins.size());
    std::vector<double> per_bin;
    for (std::size_t b = 0; b < bins.size(); ++b) {
        if (bins[b].empty()) continue;
        const auto [lowest, highest] = std::minmax_element(bins[b].begin(), bins[b].end());
        for (std::size_t n = 0; n < ranges.size(); ++n) {
            // A band wholly beyond the response's reach of every bin of b leaks nothing into it.
            if (n == b || ranges[n].first > *highest + reach || ranges[n].second < *lowest - reach) continue;
            per_bin.clear();
            for (int k : bins[b]) {
                double s = 0.0;
                const int lo = std::max(ranges[n].first, k - reach);
                const int hi = std::min(ranges[n].second, k + reach);
                for (int j = lo; j <= hi; ++j) s += response(k - j);
                per_bin.push_back(s / total);
            }
            double c = 0.0;
            if (median) {
                const auto mid = per_bin.begin() + static_cast<std::ptrdiff_t>(per_bin.size() / 2);
                std::nth_element(per_bin.begin(), mid, per_bin.end());
                c = *mid;
            } else {
                for (double v : per_bin) c += v;
                c /= static_cast<double>(per_bin.size());
            }
            if (c > least_coefficient) leak[b].push_back({.from = n, .coefficient = c});
        }
    }
    return leak;
}

std::vector<std::vector<float>> leakage_levels_db(const std::vector<std::vector<band_leak>>& leak,
                                                  const std::vector<std::span<const float>>& level_db,
                                                  std::span<const int> band_total_bins, leak_sources sources,
                                                  const std::vector<bool>& spread) {
    assert(leak.size() == level_db.size() && leak.size() == band_total_bins.size());
    assert(sources == leak_sources::all || spread.size() == leak.size());
    // Each band's levels as powers, once per frame (a band leaks into several), a block of frames
    // at a time: the table for a whole long note was the noise model's largest buffer (17 MB on a
    // 10-minute note, tools/bench_memory). The sums run over leak[b] in the same order as before.
    constexpr std::size_t block_frames = 4096;
    std::size_t frames = 0;
    for (const auto& levels : level_db) frames = std::max(frames, levels.size());
    std::vector<std::vector<double>> power_of(level_db.size(), std::vector<double>(std::min(frames, block_frames)));
    std::vector<std::vector<float>> out(leak.size());
    for (std::size_t b = 0; b < leak.size(); ++b) out[b].assign(level_db[b].size(), no_leak_db);
    for (std::size_t first = 0; first < frames; first += block_frames) {
        const std::size_t last = std::min(frames, first + block_frames);
        for (std::size_t b = 0; b < level_db.size(); ++b)
            for (std::size_t i = first; i < std::min(last, level_db[b].size()); ++i)
                power_of[b][i - first] = db_to_power(level_db[b][i]);
        for (std::size_t b = 0; b < leak.size(); ++b) {
            for (std::size_t i = first; i < std::min(last, level_db[b].size()); ++i) {
                double power = 0.0;
                for (const band_leak& l : leak[b]) {
                    if (i >= level_db[l.from].size()) continue;
                    const double ratio_k = static_cast<double>(band_total_bins[b]) / band_total_bins[l.from];
                    // n's density in b's band power (mean bin power times b's K, as b's level is).
                    const double from_power = power_of[l.from][i - first] * ratio_k;
                    if (sources == leak_sources::all) {
                        power += l.coefficient * from_power;
                    } else if (sources == leak_sources::skirts) {
                        if (!spread[l.from]) power += l.coefficient * from_power;
                    } else if (spread[l.from]) {
                        power += l.coefficient * std::max(0.0, from_power - power_of[b][i - first]);
                    }
                }
                if (power > 0.0) out[b][i] = std::max(no_leak_db, static_cast<float>(power_to_db(power)));
            }
        }
    }
    return out;
}

}  // namespace wane

// Where a copy differs from its recording (see differences.hpp).
#include "measure/differences.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <cstdint>
#include <utility>

#include "core/units.hpp"
#include "spectrum/stft.hpp"

namespace wane {

namespace {

constexpr double third_octave_reference_hz = 1000.0;  // base-2 third-octave centres (IEC 61260-1)
constexpr double lowest_band_hz = 25.0;
constexpr double tiny_power = 1e-30;                  // keeps log10 finite for an empty cell

/// Third-octave band edges from the band holding lowest_band_hz to the one holding nyquist_hz.
std::vector<double> third_octave_edges(double nyquist_hz) {
    auto index_of = [](double f_hz) { return static_cast<int>(std::lround(3.0 * std::log2(f_hz / third_octave_reference_hz))); };
    const int first = index_of(lowest_band_hz), last = index_of(nyquist_hz);
    std::vector<double> edges{0.0};
    for (int k = first; k < last; ++k) edges.push_back(third_octave_reference_hz * std::exp2((k + 0.5) / 3.0));
    edges.push_back(nyquist_hz);
    return edges;
}

/// Time edges from the onset that start before end_s, then end_s.
std::vector<double> time_edges_until(const std::vector<double>& asked, double end_s) {
    std::vector<double> edges;
    for (const double t : asked) {
        if (t < end_s) edges.push_back(t);
    }
    if (!edges.empty()) edges.push_back(end_s);
    return edges;
}

}  // namespace

difference_cells difference_grid(std::span<const float> a, std::span<const float> b, double sample_rate_hz,
                                 std::size_t onset_frames, const difference_params& params) {
    assert(sample_rate_hz > 0.0 && onset_frames <= a.size());
    difference_cells c;
    const int window_length = std::max(33, static_cast<int>(std::lround(params.window_s * sample_rate_hz)) | 1);
    stft_plan plan({.window = window_kind::hann, .window_length = window_length,
                    .fft_size = fast_fft_size(2 * window_length)});
    c.band_edges_hz = third_octave_edges(0.5 * sample_rate_hz);
    c.bands = static_cast<int>(c.band_edges_hz.size()) - 1;
    const double end_s = static_cast<double>(a.size() - onset_frames) / sample_rate_hz;
    c.time_edges_s = time_edges_until(params.time_edges_s, end_s);
    c.times = std::max(0, static_cast<int>(c.time_edges_s.size()) - 1);
    if (c.times == 0) return c;

    const int bins = plan.fft_size() / 2 + 1;
    std::vector<int> band_of_bin(static_cast<std::size_t>(bins));
    for (int k = 0, band = 0; k < bins; ++k) {
        const double f_hz = k * sample_rate_hz / plan.fft_size();
        while (band + 1 < c.bands && f_hz >= c.band_edges_hz[static_cast<std::size_t>(band) + 1]) ++band;
        band_of_bin[static_cast<std::size_t>(k)] = band;
    }
    const std::size_t cells = static_cast<std::size_t>(c.bands) * static_cast<std::size_t>(c.times);
    std::vector<double> sum_a(cells, 0.0), sum_b(cells, 0.0);
    std::vector<int> frames(static_cast<std::size_t>(c.times), 0);
    const auto hop = std::max<std::int64_t>(1, std::llround(params.hop_s * sample_rate_hz));
    const auto first = static_cast<std::int64_t>(onset_frames) + std::llround(c.time_edges_s.front() * sample_rate_hz);
    int cell = 0;
    for (std::int64_t centre = first; centre < static_cast<std::int64_t>(a.size()); centre += hop) {
        const double t_s = static_cast<double>(centre - static_cast<std::int64_t>(onset_frames)) / sample_rate_hz;
        while (cell + 1 < c.times && t_s >= c.time_edges_s[static_cast<std::size_t>(cell) + 1]) ++cell;
        const std::size_t row = c.at(0, cell);
        for (auto [x, sums] : {std::pair{a, &sum_a}, std::pair{b, &sum_b}}) {
            plan.analyze(x, centre);
            const std::span<const float> power = plan.power();
            for (std::size_t k = 0; k < power.size(); ++k) (*sums)[row + static_cast<std::size_t>(band_of_bin[k])] += static_cast<double>(power[k]);
        }
        ++frames[static_cast<std::size_t>(cell)];
    }
    c.a_db.resize(cells);
    c.b_db.resize(cells);
    for (std::size_t i = 0; i < cells; ++i) {
        const double n = std::max(1, frames[i / static_cast<std::size_t>(c.bands)]);
        c.a_db[i] = power_to_db(std::max(tiny_power, sum_a[i] / n));
        c.b_db[i] = power_to_db(std::max(tiny_power, sum_b[i] / n));
    }
    c.loudest_db = *std::max_element(c.a_db.begin(), c.a_db.end());
    const double floor_db = c.loudest_db - params.floor_db, counted_db = c.loudest_db - params.range_db;
    c.diff_db.resize(cells);
    c.counted.resize(cells);
    const double top_hz = params.max_freq_hz > 0.0 ? params.max_freq_hz : infinity;
    for (std::size_t i = 0; i < cells; ++i) {
        c.diff_db[i] = std::max(c.b_db[i], floor_db) - std::max(c.a_db[i], floor_db);
        const bool in_band = c.band_edges_hz[i % static_cast<std::size_t>(c.bands)] < top_hz;
        c.counted[i] = in_band && std::max(c.a_db[i], c.b_db[i]) >= counted_db ? 1 : 0;
    }
    return c;
}

namespace {

/// Grows one region from seed over same-signed 4-neighbours of at least `least` dB, claiming them.
difference_region grow_region(const difference_cells& c, std::size_t seed, double least,
                              std::vector<unsigned char>& claimed) {
    const double seed_db = c.diff_db[seed];
    const bool louder = seed_db > 0.0;
    difference_region r{.band_first = c.bands, .band_last = -1, .time_first = c.times, .time_last = -1,
                        .largest_diff_db = seed_db};
    std::vector<std::size_t> todo{seed};
    claimed[seed] = 1;
    double sum_db = 0.0;
    while (!todo.empty()) {
        const std::size_t i = todo.back();
        todo.pop_back();
        const int band = static_cast<int>(i % static_cast<std::size_t>(c.bands));
        const int time = static_cast<int>(i / static_cast<std::size_t>(c.bands));
        r.band_first = std::min(r.band_first, band);
        r.band_last = std::max(r.band_last, band);
        r.time_first = std::min(r.time_first, time);
        r.time_last = std::max(r.time_last, time);
        sum_db += c.diff_db[i];
        ++r.cells;
        const int nb[4][2] = {{band - 1, time}, {band + 1, time}, {band, time - 1}, {band, time + 1}};
        for (const auto& n : nb) {
            if (n[0] < 0 || n[0] >= c.bands || n[1] < 0 || n[1] >= c.times) continue;
            const std::size_t j = c.at(n[0], n[1]);
            const double d = c.diff_db[j];
            if (claimed[j] || !c.counted[j] || (d > 0.0) != louder || std::abs(d) < least) continue;
            claimed[j] = 1;
            todo.push_back(j);
        }
    }
    r.mean_diff_db = sum_db / r.cells;
    r.low_hz = c.band_edges_hz[static_cast<std::size_t>(r.band_first)];
    r.high_hz = c.band_edges_hz[static_cast<std::size_t>(r.band_last) + 1];
    r.from_s = c.time_edges_s[static_cast<std::size_t>(r.time_first)];
    r.to_s = c.time_edges_s[static_cast<std::size_t>(r.time_last) + 1];
    r.to_end = r.time_last + 1 == c.times;
    return r;
}

}  // namespace

std::vector<difference_region> largest_differences(const difference_cells& c, const difference_params& params,
                                                   std::size_t max_regions) {
    std::vector<std::size_t> order;
    for (std::size_t i = 0; i < c.diff_db.size(); ++i) {
        if (c.counted[i] && std::abs(c.diff_db[i]) >= params.threshold_db) order.push_back(i);
    }
    std::stable_sort(order.begin(), order.end(),
                     [&](std::size_t x, std::size_t y) { return std::abs(c.diff_db[x]) > std::abs(c.diff_db[y]); });
    std::vector<unsigned char> claimed(c.diff_db.size(), 0);
    std::vector<difference_region> out;
    for (const std::size_t seed : order) {
        if (out.size() >= max_regions) break;
        if (claimed[seed]) continue;
        out.push_back(grow_region(c, seed, params.threshold_db, claimed));
    }
    return out;
}

double onset_rise_s(std::span<const float> x, double sample_rate_hz, std::size_t onset_frames) {
    constexpr double hop_s = 0.001, frame_s = 0.002, span_s = 0.200, within_db = 3.0;
    const auto hop = std::max<std::size_t>(1, static_cast<std::size_t>(std::lround(hop_s * sample_rate_hz)));
    const auto frame = std::max<std::size_t>(1, static_cast<std::size_t>(std::lround(frame_s * sample_rate_hz)));
    const std::size_t end = std::min(x.size(), onset_frames + static_cast<std::size_t>(std::lround(span_s * sample_rate_hz)));
    std::vector<double> power;  // mean square per frame
    for (std::size_t start = onset_frames; start + frame <= end; start += hop) {
        double sum = 0.0;
        for (std::size_t n = start; n < start + frame; ++n) sum += static_cast<double>(x[n]) * static_cast<double>(x[n]);
        power.push_back(sum / static_cast<double>(frame));
    }
    if (power.empty()) return 0.0;
    const double target = *std::max_element(power.begin(), power.end()) * std::pow(10.0, -within_db / 10.0);
    const auto first = std::find_if(power.begin(), power.end(), [&](double p) { return p >= target; });
    return static_cast<double>(first - power.begin()) * static_cast<double>(hop) / sample_rate_hz;
}

}  // namespace wane

#include "measure/decay.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>

#include "core/units.hpp"

namespace wane {

namespace {

/// x^2 in double (samples are stored as float, sums accumulate in double).
inline double squared(float v) { return static_cast<double>(v) * static_cast<double>(v); }

/// Mean of x^2 over consecutive blocks of block_frames (the last, partial block dropped unless it
/// is the only one), as levels in dB (10 log10 of the mean square) at the block centres.
struct block_levels {
    std::vector<double> time_s;
    std::vector<double> level_db;
};

/// Level floor for silent blocks: far below any float signal (float's smallest normal is -759 dB
/// in power), so log10(0) never enters a regression.
constexpr double silent_level_db = -800.0;

block_levels levels_of_blocks(std::span<const float> x, double sample_rate_hz, std::size_t block_frames) {
    assert(block_frames >= 1);
    block_levels out;
    const std::size_t count = std::max<std::size_t>(1, x.size() / block_frames);
    out.time_s.reserve(count);
    out.level_db.reserve(count);
    for (std::size_t b = 0; b < count; ++b) {
        const std::size_t begin = b * block_frames;
        const std::size_t end = std::min(x.size(), begin + block_frames);
        double sum_sq = 0.0;
        for (std::size_t i = begin; i < end; ++i) sum_sq += squared(x[i]);
        const double ms = end > begin ? sum_sq / static_cast<double>(end - begin) : 0.0;
        out.time_s.push_back((static_cast<double>(begin) + 0.5 * static_cast<double>(end - begin)) / sample_rate_hz);
        out.level_db.push_back(ms > 0.0 ? power_to_db(ms) : silent_level_db);
    }
    return out;
}

struct line_fit {
    double slope = not_measured;
    double intercept = not_measured;
    double correlation = not_measured;
};

/// Ordinary least squares y = intercept + slope * t over n points given as accessor callables.
template <class T, class Y>
line_fit least_squares(std::size_t first, std::size_t last, T time_at, Y value_at) {
    const std::size_t n = last - first + 1;
    if (last < first || n < 2) return {};
    double mean_t = 0.0, mean_y = 0.0;
    for (std::size_t i = first; i <= last; ++i) {
        mean_t += time_at(i);
        mean_y += value_at(i);
    }
    mean_t /= static_cast<double>(n);
    mean_y /= static_cast<double>(n);
    double stt = 0.0, sty = 0.0, syy = 0.0;
    for (std::size_t i = first; i <= last; ++i) {
        const double dt = time_at(i) - mean_t;
        const double dy = value_at(i) - mean_y;
        stt += dt * dt;
        sty += dt * dy;
        syy += dy * dy;
    }
    if (stt <= 0.0) return {};
    line_fit f;
    f.slope = sty / stt;
    f.intercept = mean_y - f.slope * mean_t;
    f.correlation = syy > 0.0 ? sty / std::sqrt(stt * syy) : not_measured;
    return f;
}

line_fit fit_blocks(const block_levels& lv, std::size_t first, std::size_t last) {
    return least_squares(first, last, [&](std::size_t i) { return lv.time_s[i]; },
                         [&](std::size_t i) { return lv.level_db[i]; });
}

/// First block index >= from whose level is below threshold_db; lv.size() when none.
std::size_t first_block_below(const block_levels& lv, std::size_t from, double threshold_db) {
    for (std::size_t i = from; i < lv.level_db.size(); ++i) {
        if (lv.level_db[i] < threshold_db) return i;
    }
    return lv.level_db.size();
}

double mean_square(std::span<const float> x, std::size_t begin) {
    if (begin >= x.size()) return 0.0;
    double sum_sq = 0.0;
    for (std::size_t i = begin; i < x.size(); ++i) sum_sq += squared(x[i]);
    return sum_sq / static_cast<double>(x.size() - begin);
}

}  // namespace

std::vector<double> schroeder_curve_db(std::span<const float> x, std::size_t end_frames, double tail_energy) {
    assert(end_frames <= x.size());
    assert(tail_energy >= 0.0);
    std::vector<double> curve(end_frames);
    // Backward cumulative sum of x^2 (double), then normalised by the total.
    double acc = tail_energy;
    for (std::size_t i = end_frames; i-- > 0;) {
        acc += squared(x[i]);
        curve[i] = acc;
    }
    const double total = acc;
    for (double& v : curve) v = total > 0.0 && v > 0.0 ? power_to_db(v / total) : -infinity;
    return curve;
}

decay_fit fit_decay_range(std::span<const double> curve_db, double sample_rate_hz, double from_db, double to_db) {
    assert(from_db > to_db);
    decay_fit out;
    std::size_t first = curve_db.size();
    for (std::size_t i = 0; i < curve_db.size(); ++i) {
        if (curve_db[i] <= from_db) { first = i; break; }
    }
    std::size_t last = curve_db.size();
    for (std::size_t i = first; i < curve_db.size(); ++i) {
        if (curve_db[i] <= to_db) { last = i; break; }
    }
    if (first >= curve_db.size() || last >= curve_db.size() || !std::isfinite(curve_db[last])) return out;
    const line_fit f = least_squares(first, last, [&](std::size_t i) { return static_cast<double>(i) / sample_rate_hz; },
                                     [&](std::size_t i) { return curve_db[i]; });
    if (!(f.slope < 0.0)) return out;
    out.slope_db_per_s = f.slope;
    out.intercept_db = f.intercept;
    out.correlation = f.correlation;
    out.t60_s = slope_db_per_s_to_t60(f.slope);
    out.from_s = static_cast<double>(first) / sample_rate_hz;
    out.to_s = static_cast<double>(last) / sample_rate_hz;
    return out;
}

noise_crosspoint find_noise_crosspoint(std::span<const float> x, double sample_rate_hz, const decay_params& params) {
    noise_crosspoint out;
    const std::size_t n = x.size();
    auto frames_of = [&](double t_s) {
        return static_cast<std::size_t>(std::clamp(std::llround(t_s * sample_rate_hz), 1LL, static_cast<long long>(n)));
    };
    const std::size_t tail_begin = n - static_cast<std::size_t>(params.noise_tail_fraction * static_cast<double>(n));
    std::size_t block_frames = frames_of(params.initial_block_s);
    if (n < 4 * block_frames) return out;

    // Steps 1-2: block levels; noise from the last 10 %.
    block_levels lv = levels_of_blocks(x, sample_rate_hz, block_frames);
    const auto peak_it = std::max_element(lv.level_db.begin(), lv.level_db.end());
    const std::size_t peak_block = static_cast<std::size_t>(peak_it - lv.level_db.begin());
    const double peak_db = *peak_it;
    if (peak_db <= silent_level_db) return out;
    // A noise-free tail (digital silence) is taken 200 dB below the peak: the decay simply ends.
    constexpr double silent_noise_below_peak_db = 200.0;
    auto noise_db_of = [&](double ms) {
        return ms > 0.0 ? power_to_db(ms) : peak_db - silent_noise_below_peak_db;
    };
    double noise_db = noise_db_of(mean_square(x, tail_begin));
    if (peak_db < noise_db + params.first_fit_above_noise_db) return out;

    // Step 3: regression from the peak down to noise + 10 dB.
    std::size_t stop = first_block_below(lv, peak_block + 1, noise_db + params.first_fit_above_noise_db);
    const std::size_t first_last = std::min(std::max(stop, peak_block + 2) - 1, lv.level_db.size() - 1);
    line_fit fit = fit_blocks(lv, peak_block, first_last);
    if (!(fit.slope < 0.0)) return out;
    // Step 4: preliminary crosspoint, where the line meets the noise level.
    double cross_s = (noise_db - fit.intercept) / fit.slope;

    int iter = 0;
    for (; iter < params.max_iterations; ++iter) {
        // Step 5-6: intervals giving blocks_per_10db points per 10 dB of decay.
        const double block_s = std::max(params.min_block_s, 10.0 / -fit.slope / params.blocks_per_10db);
        block_frames = frames_of(block_s);
        lv = levels_of_blocks(x, sample_rate_hz, block_frames);
        // Step 7: noise from 5 dB of decay past the crosspoint, but at least the last 10 %.
        const double noise_from_s = cross_s + params.noise_start_below_crosspoint_db / -fit.slope;
        const std::size_t noise_begin = std::min(frames_of(noise_from_s), tail_begin);
        noise_db = noise_db_of(mean_square(x, noise_begin));
        // Step 8: late decay slope between noise + 25 dB and noise + 5 dB.
        const std::size_t peak_b = static_cast<std::size_t>(
            std::max_element(lv.level_db.begin(), lv.level_db.end()) - lv.level_db.begin());
        std::size_t top = peak_b;
        for (std::size_t i = peak_b; i < lv.level_db.size(); ++i) {
            if (lv.level_db[i] <= noise_db + params.late_fit_top_above_noise_db) { top = i; break; }
        }
        const std::size_t bottom = first_block_below(lv, top + 1, noise_db + params.late_fit_bottom_above_noise_db);
        if (bottom < top + 2) break;  // too few points: keep the previous estimate
        const line_fit late = fit_blocks(lv, top, bottom - 1);
        if (!(late.slope < 0.0)) break;
        fit = late;
        // Step 9: new crosspoint; step 10: iterate until it moves less than one interval.
        const double new_cross_s = (noise_db - fit.intercept) / fit.slope;
        const bool settled = std::abs(new_cross_s - cross_s) < block_s;
        cross_s = new_cross_s;
        if (settled) { ++iter; break; }
    }
    out.found = true;
    out.crosspoint_frames = frames_of(cross_s);
    out.noise_mean_square = db_to_power(noise_db);
    out.late_slope_db_per_s = fit.slope;
    out.iterations = iter;
    return out;
}

decay_times measure_decay(std::span<const float> x, double sample_rate_hz, const decay_params& params) {
    decay_times out;
    out.crosspoint = find_noise_crosspoint(x, sample_rate_hz, params);
    if (!out.crosspoint.found) return out;
    const std::size_t initial_block = std::max<std::size_t>(1, static_cast<std::size_t>(
                                                                   std::llround(params.initial_block_s * sample_rate_hz)));
    const block_levels lv = levels_of_blocks(x, sample_rate_hz, initial_block);
    const double peak_db = *std::max_element(lv.level_db.begin(), lv.level_db.end());
    out.dynamic_range_db = peak_db - power_to_db(out.crosspoint.noise_mean_square);

    // Lundeby et al. 1995: energy of the exponential tail beyond the crosspoint, where the line
    // meets the noise power P: sum over samples of P exp(-k t) = P fs / k, k = |slope| ln(10) / 10
    // (power decay rate in 1/s from a slope in dB/s).
    double tail_energy = 0.0;
    if (params.compensate_tail && out.crosspoint.late_slope_db_per_s < 0.0) {
        const double k_per_s = -out.crosspoint.late_slope_db_per_s * std::log(10.0) / 10.0;
        tail_energy = out.crosspoint.noise_mean_square * sample_rate_hz / k_per_s;
    }
    const std::vector<double> curve = schroeder_curve_db(x, out.crosspoint.crosspoint_frames, tail_energy);
    out.t20_fit = fit_decay_range(curve, sample_rate_hz, decay_eval_start_db, t20_eval_end_db);
    out.t30_fit = fit_decay_range(curve, sample_rate_hz, decay_eval_start_db, t30_eval_end_db);
    if (out.dynamic_range_db >= -t20_eval_end_db + noise_margin_db) out.t20_s = out.t20_fit.t60_s;
    if (out.dynamic_range_db >= -t30_eval_end_db + noise_margin_db) out.t30_s = out.t30_fit.t60_s;
    return out;
}

}  // namespace wane

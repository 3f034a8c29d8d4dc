// A partial's pan and spread over many spans (see stereo_drift.hpp).
#include "analysis/stereo_drift.hpp"

#include <algorithm>
#include <cmath>
#include <vector>

#include "core/stereo.hpp"

namespace wane {

namespace {

/// Least-squares line d = mean_d + slope (t - mean_t) through the spans' level differences (dB).
struct difference_line {
    double mean_t_s = 0.0;
    double mean_db = 0.0;
    double slope_db_per_s = 0.0;
    double at(double t_s) const { return mean_db + slope_db_per_s * (t_s - mean_t_s); }
};

difference_line fit_line(std::span<const double> t_s, std::span<const double> d_db) {
    const auto n = static_cast<double>(t_s.size());
    difference_line line;
    for (std::size_t i = 0; i < t_s.size(); ++i) {
        line.mean_t_s += t_s[i] / n;
        line.mean_db += d_db[i] / n;
    }
    double tt = 0.0;
    double td = 0.0;
    for (std::size_t i = 0; i < t_s.size(); ++i) {
        tt += (t_s[i] - line.mean_t_s) * (t_s[i] - line.mean_t_s);
        td += (t_s[i] - line.mean_t_s) * (d_db[i] - line.mean_db);
    }
    line.slope_db_per_s = tt > 0.0 ? td / tt : 0.0;
    return line;
}

}  // namespace

std::optional<partial_drift> drift_of_spans(std::span<const channel_amplitudes> spans, double span_s, double attack_s,
                                            double max_spread_db_per_s, const drift_params& params) {
    if (spans.empty()) return std::nullopt;
    double pan_left = 0.0;
    double pan_right = 0.0;
    std::vector<double> t_s;
    std::vector<double> d_db;
    for (const channel_amplitudes& c : spans) {
        t_s.push_back(c.time_s);
        d_db.push_back(20.0 * std::log10(c.right_amp / c.left_amp));
        if (c.time_s + span_s / 2.0 <= params.pan_span_s || pan_left == 0.0) {  // the first span always counts
            pan_left += c.left_amp * c.left_amp;
            pan_right += c.right_amp * c.right_amp;
        }
    }
    partial_drift out{.pan = pan_of_amplitudes(std::sqrt(pan_left), std::sqrt(pan_right)).pan};
    if (std::ssize(spans) < params.min_points) return out;
    const difference_line line = fit_line(t_s, d_db);
    const double pan_db = pan_level_difference_db(out.pan);
    double around_pan = 0.0;  // squared distance of the points from the constant pan's difference
    double around_line = 0.0;
    for (std::size_t i = 0; i < t_s.size(); ++i) {
        around_pan += (d_db[i] - pan_db) * (d_db[i] - pan_db);
        around_line += (d_db[i] - line.at(t_s[i])) * (d_db[i] - line.at(t_s[i]));
    }
    const double move_db = std::abs(line.slope_db_per_s) * (t_s.back() - t_s.front());
    const bool explains = around_line <= (1.0 - params.min_explained) * around_pan;
    if (!explains || move_db < params.min_move_db || std::abs(line.slope_db_per_s) < params.min_slope_db_per_s)
        return out;
    out.spread_db_per_s = std::clamp(line.slope_db_per_s, -max_spread_db_per_s, max_spread_db_per_s);
    out.pan = pan_of_level_difference(line.at(attack_s));
    return out;
}

}  // namespace wane

// fit_partial (see envelope_fit.hpp): the frames of a track to an attack and decay segments; the
// line fit itself is fit_level_lines (level_lines.cpp).
#include "fitting/envelope_fit.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <vector>

#include "fitting/knot_search.hpp"
#include "fitting/partial_freq.hpp"

namespace wane {

namespace {

using knot_search::min_points_per_segment;

/// Residuals above the line count at most this much in the power-mean level offset, dB
/// (beating maxima of two equal modes reach +6 dB over the dB mean; a spike should not rule).
constexpr double max_offset_residual_db = 9.5;
/// Model error assumed in the weights of the power-mean level offset, dB.
constexpr double offset_sigma_db = 0.5;
/// Frames in the running mean that gives the first pass its expected level above the floor.
constexpr int excess_smoothing_frames = 9;
/// Frames over which the local roughness of the level is measured (odd).
constexpr std::size_t roughness_frames = 17;
constexpr std::size_t roughness_stride = 4;
/// Median absolute value of a zero-mean Gaussian = 0.6745 sigma, so sigma = 1.4826 median|x|.
constexpr double mad_to_sigma = 1.4826;
/// The noise term may be at most this many times the roughness estimate (overlapping frames
/// smooth the noise, so the roughness understates it).
constexpr double roughness_cap = 2.0;
/// Furthest the first decay line may be run back before the first frame of a late-born track, dB.
constexpr double max_backward_rise_db = 6.0;
/// Refits after moving the fit's end to where the fitted envelope meets the floor margin.
constexpr int end_refit_passes = 2;
/// Frames in the running median that decides where the track reaches the floor.
constexpr int floor_median_frames = 5;

/// Standard deviation of a frame's level in dB from additive noise, for a sinusoid whose level
/// exceeds the floor (mean noise power at the peak) by excess_db: the level error is
/// 20 log10 |1 + n / A| ~ db_per_neper Re(n / A), with Var = db_per_neper^2 N / (2 A^2).
double noise_sigma_db(double excess_db) {
    return db_per_neper / std::sqrt(2.0) * to_amp(level_db{-excess_db}).lin;
}

/// Level of the decay pieces at time t >= the first piece's start (envelope_level without
/// rebuilding the pieces at every call).
double decay_level_db(std::span<const envelope_piece> pieces, double t) {
    for (const envelope_piece& p : pieces)
        if (t < p.end_s) return p.start_level.db + p.slope_db_per_s * (t - p.start_s);
    return -infinity;
}

double wrap_phase(double phase_rad) { return std::remainder(phase_rad, two_pi); }

}  // namespace

namespace {

/// The floor can overstate the noise a frame carries (a floor raised by the attack's noise, a
/// band floor far from the partial), so the weights cap the noise term at a multiple of the
/// level's local roughness: sigma ~ 1.4826 median|second difference| / sqrt(6) (for white noise
/// the second difference has variance 6 sigma^2), the median over roughness_frames frames,
/// evaluated every roughness_stride frames and held in between. Infinite on short tracks.
std::vector<double> level_roughness_db(const std::vector<track_point>& pts) {
    const std::size_t n = pts.size();
    std::vector<double> rough(n, infinity);
    if (n < roughness_frames) return rough;
    std::vector<double> d2(n, 0.0);
    for (std::size_t i = 1; i + 1 < n; ++i)
        d2[i] = std::abs(pts[i + 1].level_db - 2.0 * pts[i].level_db + pts[i - 1].level_db);
    d2[0] = d2[1];
    d2[n - 1] = d2[n - 2];
    std::array<double, roughness_frames> win{};
    for (std::size_t i = 0; i < n; i += roughness_stride) {
        const std::size_t a = std::min(i >= roughness_frames / 2 ? i - roughness_frames / 2 : 0, n - roughness_frames);
        std::copy_n(d2.begin() + static_cast<std::ptrdiff_t>(a), roughness_frames, win.begin());
        std::nth_element(win.begin(), win.begin() + roughness_frames / 2, win.end());
        const double sigma = mad_to_sigma * win[roughness_frames / 2] / std::sqrt(6.0);
        for (std::size_t k = i; k < std::min(n, i + roughness_stride); ++k) rough[k] = sigma;
    }
    return rough;
}

/// Level offset to the power mean: the dB line is the geometric mean of the frames (for beating
/// modes, the stronger mode's level); the power mean keeps the partial's energy.
/// offset = 10 log10(sum w 10^(r / 10) / sum w), r = level - line (clipped above), over the
/// frames of level, time and noise_db (each frame's noise_sigma_db of its expected excess).
double power_mean_offset_db(const envelope& env, std::span<const double> level, std::span<const double> time,
                            std::span<const double> noise_db) {
    // Reliability weights here carry a fixed model error so the strongest frames do not
    // decide alone: 1 / (offset_sigma^2 + noise^2).
    const auto pieces = envelope_pieces(env);
    double sw = 0.0, sp = 0.0;
    for (std::size_t i = 0; i < level.size(); ++i) {
        const double sn = noise_db[i];
        const double w = 1.0 / (offset_sigma_db * offset_sigma_db + sn * sn);
        const double r = level[i] - decay_level_db(pieces, time[i]);
        sp += w * db_to_power(std::min(r, max_offset_residual_db));
        sw += w;
    }
    return power_to_db(sp / sw);
}

/// Envelope of frames [first, end) of a track: weights, decimation, the line fit, the attack and
/// the power-mean offset. Frequency and phase are filled by the caller.
partial_fit fit_region(const std::vector<track_point>& pts, std::span<const double> expected_excess_db,
                       std::span<const double> rough_db, std::size_t peak, std::size_t first, std::size_t end, const envelope_fit_params& params) {
    const std::size_t m = end - first;
    // Frame weight 1 / (model^2 + noise^2), the noise term from the expected (not the measured)
    // level above the floor: weights from the measured level would favour frames that noise
    // pushed up and bias the tail towards a slower decay. The level itself is used as measured:
    // for circular noise n weaker than the sinusoid A, E ln|A + n| = ln A exactly (the mean of
    // ln|1 + z| over a circle of radius < 1 is 0), so the dB level is unbiased down to the floor.
    std::vector<double> level(m), weight(m), time(m), noise_db(m);
    for (std::size_t i = 0; i < m; ++i) {
        level[i] = pts[first + i].level_db;
        time[i] = pts[first + i].time_s;
        noise_db[i] = noise_sigma_db(expected_excess_db[first + i]);  // here and in the offset
    }
    for (std::size_t i = 0; i < m; ++i) {
        const double sn = std::min(noise_db[i], roughness_cap * rough_db[first + i]);
        weight[i] = 1.0 / (params.model_sigma_db * params.model_sigma_db + sn * sn);
    }

    // Decimate into groups of g consecutive frames (weighted means) for the breakpoint search.
    const std::size_t maxp = static_cast<std::size_t>(params.max_fit_points);
    const std::size_t g = (m + maxp - 1) / maxp;
    const std::size_t np = (m + g - 1) / g;
    std::vector<double> gx(np), gy(np), gw(np);
    for (std::size_t q = 0; q < np; ++q) {
        double sw = 0.0, sx = 0.0, sy = 0.0;
        for (std::size_t i = q * g; i < std::min(m, (q + 1) * g); ++i) {
            sw += weight[i];
            sx += weight[i] * time[i];
            sy += weight[i] * level[i];
        }
        gw[q] = sw;
        gx[q] = sx / sw;
        gy[q] = sy / sw;
    }
    level_line_fit lines = fit_level_lines(gx, gy, gw, params);
    // The level after the fit region continues the last slope; a partial of a decaying note is
    // not extrapolated to grow for ever, so a rising last segment is held level.
    if (lines.slopes_db_per_s.back() > 0.0) lines.slopes_db_per_s.back() = 0.0;

    // Envelope: the attack ends half a window before the level peak (the frame centred there is
    // the first whose window lies wholly after an abrupt onset); the first line runs back to it.
    // A track whose first frame is already its peak shows no rise at all (it was born late, e.g.
    // under the noise of the attack): its decay line runs back to the onset, attack 0.
    partial_fit out;
    envelope& env = out.env;
    const double t_peak = pts[peak].time_s;
    // Running back is trusted over a short way only: when it would climb more than
    // max_backward_rise_db above the first fitted point, the regular attack rule applies.
    const double smeared_attack_s = std::clamp(t_peak - 0.5 * params.window_s, 0.0, t_peak);
    env.attack_s = peak == 0 ? 0.0 : smeared_attack_s;
    if (lines.slopes_db_per_s[0] * (env.attack_s - gx[0]) > max_backward_rise_db) env.attack_s = smeared_attack_s;
    env.peak = level_db{lines.start_level_db + lines.slopes_db_per_s[0] * (env.attack_s - gx[0])};
    const std::size_t k = lines.slopes_db_per_s.size();
    for (std::size_t j = 0; j < k; ++j) {
        decay_segment seg{.t60_s = slope_db_per_s_to_t60(lines.slopes_db_per_s[j]), .until_s = {}};
        if (j + 1 < k) seg.until_s = lines.knots_s[j];
        env.decay.push_back(seg);
    }
    env.peak.db += power_mean_offset_db(env, level, time, noise_db);
    // Fit error: plain RMS over the fitted frames.
    const auto pieces = envelope_pieces(env);
    double se = 0.0;
    for (std::size_t i = 0; i < m; ++i) {
        const double r = level[i] - decay_level_db(pieces, time[i]);
        se += r * r;
    }
    out.weighted_sq_error_db2 = se;
    out.weight_sum = static_cast<double>(m);
    out.rms_error_db = std::sqrt(se / static_cast<double>(m));
    out.fit_start_s = time.front();
    out.fit_end_s = time.back();
    out.fitted_frames = static_cast<int>(m);
    return out;
}

/// Index of the level's peak, smoothed over three frames (mean in dB).
std::size_t smoothed_peak(const std::vector<track_point>& pts) {
    const std::size_t n = pts.size();
    std::size_t peak = 0;
    double peak_level = -infinity;
    for (std::size_t i = 0; i < n; ++i) {
        const std::size_t a = i > 0 ? i - 1 : i, b = std::min(i + 1, n - 1);
        double s = 0.0;
        for (std::size_t k = a; k <= b; ++k) s += pts[k].level_db;
        s /= static_cast<double>(b - a + 1);
        if (s > peak_level) {
            peak_level = s;
            peak = i;
        }
    }
    return peak;
}

/// The median of five values (the third smallest: nth_element's value) by a fixed network of
/// compare-exchanges, branch-free: the first two values' order, then the last two's, and so on.
double median_of_five(std::array<double, 5> v) {
    auto order = [&](std::size_t a, std::size_t b) {
        const double lo = std::min(v[a], v[b]), hi = std::max(v[a], v[b]);
        v[a] = lo, v[b] = hi;
    };
    order(0, 1), order(3, 4), order(0, 3), order(1, 4), order(1, 2), order(2, 3), order(1, 2);
    return v[2];
}

/// Running median of (level - floor) over floor_median_frames frames, centred (fewer at the ends).
std::vector<double> running_median_excess(const std::vector<double>& excess) {
    static_assert(floor_median_frames == 5);  // median_of_five away from the ends
    const std::size_t n = excess.size();
    std::vector<double> median(n);
    std::array<double, floor_median_frames> win{};
    const int half = floor_median_frames / 2;
    for (std::size_t i = 0; i < n; ++i) {
        if (i >= 2 && i + 2 < n) {
            median[i] = median_of_five({excess[i - 2], excess[i - 1], excess[i], excess[i + 1], excess[i + 2]});
            continue;
        }
        int m = 0;
        for (int d = -half; d <= half; ++d) {
            const auto k = static_cast<std::ptrdiff_t>(i) + d;
            if (k < 0 || k >= static_cast<std::ptrdiff_t>(n)) continue;
            win[m++] = excess[static_cast<std::size_t>(k)];
        }
        std::nth_element(win.begin(), win.begin() + m / 2, win.begin() + m);
        median[i] = win[m / 2];
    }
    return median;
}

/// First frame from `from` where the running median of (level - floor) is below the margin
/// (n when it never is).
std::size_t first_end_below_margin(const std::vector<double>& median, std::size_t from, const envelope_fit_params& params) {
    for (std::size_t i = from; i < median.size(); ++i)
        if (median[i] < params.floor_margin_db) return i;
    return median.size();
}

/// Centred running mean of the measured excess over excess_smoothing_frames frames.
std::vector<double> running_mean_excess(const std::vector<double>& excess) {
    const std::size_t n = excess.size();
    std::vector<double> expected(n);
    const auto half = static_cast<std::ptrdiff_t>(excess_smoothing_frames / 2);
    constexpr std::size_t half_frames = excess_smoothing_frames / 2;  ///< half, unsigned
    for (std::size_t i = 0; i < n; ++i) {
        double sum = 0.0;
        if (i >= half_frames && i + half_frames < n) {
            // Away from the ends, the whole window without the bounds tests (the same sum in the
            // same order).
            for (std::size_t k = i - half_frames; k <= i + half_frames; ++k) sum += excess[k];
            expected[i] = sum / excess_smoothing_frames;
            continue;
        }
        int count = 0;
        for (std::ptrdiff_t d = -half; d <= half; ++d) {
            const auto k = static_cast<std::ptrdiff_t>(i) + d;
            if (k < 0 || k >= static_cast<std::ptrdiff_t>(n)) continue;
            sum += excess[static_cast<std::size_t>(k)];
            ++count;
        }
        expected[i] = sum / count;
    }
    return expected;
}

/// Frequency (heard_freq_hz, fitting/partial_freq.hpp) and phase at t = 0 of out, from the fitted
/// frames [peak, end).
void fit_frequency_and_phase(const std::vector<track_point>& pts, const std::vector<double>& excess, std::size_t peak,
                             std::size_t end, const envelope_fit_params& params, partial_fit& out) {
    out.freq_hz = heard_freq_hz(pts, peak, end);

    // Phase at t = 0: phi0 = phase - 2 pi f t_c from the first reliable frames after the peak,
    // averaged on the circle with amplitude weights.
    double re = 0.0, im = 0.0;
    int used = 0;
    for (std::size_t i = peak; i < end && used < params.phase_frames; ++i) {
        if (excess[i] < params.floor_margin_db) continue;
        const double a = to_amp(level_db{pts[i].level_db}).lin;
        const double phi = pts[i].phase_rad - two_pi * out.freq_hz * pts[i].time_s;
        re += a * std::cos(phi);
        im += a * std::sin(phi);
        ++used;
    }
    out.phase_rad = used > 0 ? wrap_phase(std::atan2(im, re)) : 0.0;
}

}  // namespace

std::optional<partial_fit> fit_partial(const partial_track& track, const envelope_fit_params& params) {
    const auto& pts = track.points;
    const std::size_t n = pts.size();
    if (n < 2) return std::nullopt;

    const std::size_t peak = smoothed_peak(pts);

    // End of the fit, first pass: where the running median of (level - floor) first drops below
    // the margin. Second pass: where the fitted envelope itself comes within the margin of the
    // floor, so the end does not depend on which noisy frames happened to lie high.
    std::vector<double> excess(n);
    for (std::size_t i = 0; i < n; ++i) excess[i] = pts[i].level_db - pts[i].floor_db;
    std::size_t end = first_end_below_margin(running_median_excess(excess), peak, params);
    if (end < peak + 2) return std::nullopt;
    // Expected level above the floor: first a centred running mean of the measured excess, then
    // the fitted envelope's.
    std::vector<double> expected = running_mean_excess(excess);
    const std::vector<double> rough = level_roughness_db(pts);
    // The first pass only finds the region and the expected levels: a coarser grid will do.
    envelope_fit_params coarse = params;
    coarse.max_fit_points = std::max(min_points_per_segment * params.max_segments, params.max_fit_points / 2);
    partial_fit out = fit_region(pts, expected, rough, peak, peak, end, coarse);
    for (int pass = 0; pass < end_refit_passes; ++pass) {
        std::size_t model_end = n;
        const auto pieces = envelope_pieces(out.env);
        for (std::size_t i = peak; i < n; ++i) {
            expected[i] = decay_level_db(pieces, pts[i].time_s) - pts[i].floor_db;
            if (model_end == n && expected[i] < params.floor_margin_db) model_end = i;
        }
        if (model_end < peak + 2 || (pass > 0 && model_end == end)) break;
        end = model_end;
        out = fit_region(pts, expected, rough, peak, peak, end, params);
    }

    if (params.frequency_and_phase) fit_frequency_and_phase(pts, excess, peak, end, params, out);
    return out;
}

std::optional<std::size_t> late_part_start(const partial_track& track, const partial_fit& fit,
                                           const envelope_fit_params& params) {
    const auto& pts = track.points;
    const std::size_t n = pts.size();
    std::size_t after = 0;  // first frame after the fit
    while (after < n && pts[after].time_s <= fit.fit_end_s) ++after;
    if (after >= n) return std::nullopt;
    std::vector<double> excess(n);
    for (std::size_t i = 0; i < n; ++i) excess[i] = pts[i].level_db - pts[i].floor_db;
    const std::vector<double> median = running_median_excess(excess);
    bool clear = false;
    for (std::size_t i = after; i < n && !clear; ++i) clear = median[i] >= params.floor_margin_db + params.rebound_db;
    if (!clear) return std::nullopt;
    std::size_t start = after;
    while (median[start] < params.floor_margin_db) ++start;  // ends at the latest on the clear frame
    return start;
}

/// The envelope of two components heard as one: the earlier one's (smaller attack_s) until the
/// later one is first louder, then the later one's (its linear rise replaced from there by one
/// straight dB segment up to its peak). Within 3 dB of their power sum wherever one leads the
/// other by a few dB; at the crossing the sum is 3 dB over both (a beat's average).
envelope spliced_envelope(const envelope& early, const envelope& late, double end_s) {
    constexpr double step_s = 0.005;  ///< crossing search grid, s
    double cross_s = -1.0;
    const auto steps = static_cast<int>(std::ceil((end_s - early.attack_s) / step_s));
    for (int k = 0; k < steps; ++k) {
        const double t = early.attack_s + k * step_s;
        if (envelope_level(late, t).db > envelope_level(early, t).db) { cross_s = t; break; }
    }
    if (cross_s < 0.0) return early;  // never louder: the early one's envelope carries the group
    envelope out{.attack_s = early.attack_s, .peak = early.peak, .decay = {}};
    for (const decay_segment& d : early.decay) {
        if (d.until_s && *d.until_s < cross_s) { out.decay.push_back(d); continue; }
        out.decay.push_back({.t60_s = d.t60_s, .until_s = cross_s});
        break;
    }
    if (cross_s <= early.attack_s) out = {.attack_s = cross_s, .peak = envelope_level(early, cross_s), .decay = {}};
    const double at_cross_db = envelope_level(late, cross_s).db;
    if (cross_s < late.attack_s) {
        // slope (dB/s) = (peak - level at the crossing) / time to the peak; t60 = -60 / slope.
        const double slope = (late.peak.db - at_cross_db) / (late.attack_s - cross_s);
        out.decay.push_back({.t60_s = slope > 0.0 ? -60.0 / slope : infinity, .until_s = late.attack_s});
    }
    const double from_s = std::max(cross_s, late.attack_s);
    for (const decay_segment& d : late.decay)
        if (!d.until_s || *d.until_s > from_s) out.decay.push_back(d);
    if (out.decay.empty()) out.decay.push_back({.t60_s = infinity, .until_s = {}});
    return out;
}


partial_fit fit_track(const partial_fit& fit, const partial_track& track, const envelope_fit_params& params) {
    partial_fit out = fit;
    const auto start = late_part_start(track, fit, params);
    if (!start) return out;
    const partial_track late{.points = {track.points.begin() + static_cast<std::ptrdiff_t>(*start), track.points.end()},
                             .harmonic = track.harmonic, .cut_by_end = track.cut_by_end};
    const auto late_fit = fit_partial(late, params);
    if (!late_fit) return out;
    // A rise, not the next maximum of a beat: the late part peaks well after it comes back.
    if (late_fit->env.attack_s < late.points.front().time_s + params.min_late_rise_s) return out;
    out.env = spliced_envelope(fit.env, late_fit->env, track.points.back().time_s);
    out.fit_end_s = late_fit->fit_end_s;
    return out;
}

}  // namespace wane

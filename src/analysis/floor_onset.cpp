#include "analysis/floor_onset.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <vector>

namespace wane {

namespace {

/// Integration points per window in framed_level_db (reasoned choice: the window's power and a
/// line of at most a few hundred dB/s are smooth on this grid).
constexpr int window_points = 256;

/// Power of env at time_s (0 before the onset), from its pieces (precomputed, no allocation).
double power_at(const envelope& env, std::span<const envelope_piece> pieces, double time_s) {
    if (time_s < 0.0) return 0.0;
    if (time_s < env.attack_s) {
        const double a = to_amp(env.peak).lin * time_s / env.attack_s;
        return a * a;
    }
    for (const envelope_piece& p : pieces)
        if (time_s < p.end_s) return std::pow(10.0, 0.1 * (p.start_level.db + p.slope_db_per_s * (time_s - p.start_s)));
    return 0.0;
}

/// The window's power at the integration points of framed_level_db, w(x_k)^2 with
/// x_k = (k + 0.5) / window_points: made once per check, not once per frame.
struct window_power {
    explicit window_power(window_kind window) {
        for (int k = 0; k < window_points; ++k) {
            const double w = window_value(window, (k + 0.5) / window_points);
            w2[static_cast<std::size_t>(k)] = w * w;
        }
    }
    std::array<double, window_points> w2{};
};

/// window_power of each window kind, made once in a process (a function of the kind alone).
const window_power& window_power_of(window_kind window) {
    static_assert(static_cast<int>(window_kind::hann) == 0 && static_cast<int>(window_kind::hamming) == 1 &&
                  static_cast<int>(window_kind::blackman_harris_4) == 2);  // the array's order
    static const std::array<window_power, 3> powers{window_power(window_kind::hann), window_power(window_kind::hamming),
                                                    window_power(window_kind::blackman_harris_4)};
    const auto index = static_cast<std::size_t>(window);
    assert(index < powers.size());
    return powers[index];
}

/// The window's mean of env's power around centre_s, dB. Within a decay piece the power at the
/// next point is the one before times 10^(slope dx / 10), dx the points' spacing in seconds: exact
/// (power_at) at the first point of each piece, a relative error of a few hundred ulps at most
/// after (256 points), against a power of ten per point.
double framed_level_db(const envelope& env, std::span<const envelope_piece> pieces, const window_power& power,
                       double window_s, double centre_s) {
    double weighted = 0.0, total = 0.0;
    const double dx_s = window_s / window_points;
    std::size_t piece = pieces.size();  // the piece of the previous point (none: pieces.size())
    double p_prev = 0.0, ratio = 1.0;
    for (int k = 0; k < window_points; ++k) {
        const double x = (k + 0.5) / window_points;  // position in the window, [0, 1]
        const double w2 = power.w2[static_cast<std::size_t>(k)];
        total += w2;
        const double t = centre_s + (x - 0.5) * window_s;
        std::size_t now = pieces.size();
        if (t >= 0.0 && t >= env.attack_s) {
            now = piece < pieces.size() ? piece : 0;
            while (now < pieces.size() && t >= pieces[now].end_s) ++now;
        }
        double p = 0.0;
        if (now < pieces.size() && now == piece) {
            p = p_prev * ratio;
        } else {
            p = power_at(env, pieces, t);
            if (now < pieces.size()) ratio = std::pow(10.0, 0.1 * pieces[now].slope_db_per_s * dx_s);
        }
        piece = now;
        p_prev = p;
        weighted += w2 * p;
    }
    return weighted > 0.0 ? 10.0 * std::log10(weighted / total) : -infinity;
}

/// Whether the frames in [0, frames.first) measured, on the mean over them in dB, at least env's
/// prediction less the margin (one frame's median of a few bins scatters by 3-4 dB frame to frame,
/// measured on test_noise's 501 Hz band).
bool agrees(const envelope& env, const onset_frames& frames, const window_power& power) {
    const auto pieces = envelope_pieces(env);
    const std::size_t n = std::min(frames.first, frames.level_db.size());
    if (n == 0) return true;
    double excess_db = 0.0;
    for (std::size_t i = 0; i < n; ++i)
        excess_db += framed_level_db(env, pieces, power, frames.window_s, static_cast<double>(i) * frames.hop_s) -
                     static_cast<double>(frames.level_db[i]);
    return excess_db / static_cast<double>(n) <= frames.margin_db;
}

}  // namespace

double framed_level_db(const envelope& env, window_kind window, double window_s, double centre_s) {
    const auto pieces = envelope_pieces(env);
    return framed_level_db(env, pieces, window_power_of(window), window_s, centre_s);
}

envelope limit_run_back(const envelope& env, const onset_frames& frames) {
    assert(frames.window_s > 0.0 && frames.hop_s > 0.0);
    const window_power& power = window_power_of(frames.window);
    if (agrees(env, frames, power)) return env;
    // Hold from the latest frame time back to the onset first, then from earlier ones while the
    // frames agree: the run-back the frames allow, never past it.
    envelope best = held_before(env, static_cast<double>(frames.first) * frames.hop_s);
    for (std::size_t j = frames.first; j-- > 0;) {
        envelope candidate = held_before(env, static_cast<double>(j) * frames.hop_s);
        if (!agrees(candidate, frames, power)) break;
        best = std::move(candidate);
    }
    return best;
}

}  // namespace wane

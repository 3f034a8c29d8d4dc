// Stereo placement (see stereo.hpp).
#include "core/stereo.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <numbers>

#include "core/patch_rules.hpp"

namespace wane {

namespace {

/// theta = (pan + 1) pi / 4: 0 at hard left, pi/4 at centre, pi/2 at hard right.
double pan_angle(double pan) { return (std::clamp(pan, -1.0, 1.0) + 1.0) * std::numbers::pi / 4.0; }

/// +1 for the right channel, -1 for the left.
double side_sign(channel_side side) { return side == channel_side::right ? 1.0 : -1.0; }

constexpr double db_per_t60 = 60.0;  // a T60 is a fall of 60 dB

/// One channel's segment: slope -60/T60 dB/s moved by sign * spread/2 dB/s (inf where it holds).
double channel_t60_s(double t60_s, double spread_db_per_s, double sign) {
    const double slope_db_per_s = -db_per_t60 / t60_s + sign * spread_db_per_s / 2.0;
    if (slope_db_per_s == 0.0) return infinity;
    return -db_per_t60 / slope_db_per_s;
}

void place_envelope(envelope& env, const stereo_place& place, channel_side side) {
    const double gain = pan_gain(place.pan, side);
    const double gain_db = gain > 0.0 ? 20.0 * std::log10(gain) : patch_rules::min_level_db;
    env.peak.db = std::max(env.peak.db + gain_db, patch_rules::min_level_db);
    if (place.spread_db_per_s == 0.0) return;
    for (decay_segment& seg : env.decay) seg.t60_s = channel_t60_s(seg.t60_s, place.spread_db_per_s, side_sign(side));
}

}  // namespace

double pan_gain(double pan, channel_side side) {
    const double theta = pan_angle(pan);
    return std::numbers::sqrt2 * (side == channel_side::right ? std::sin(theta) : std::cos(theta));
}

double pan_level_difference_db(double pan) {
    const double l = pan_gain(pan, channel_side::left);
    const double r = pan_gain(pan, channel_side::right);
    if (l <= 0.0) return infinity;
    if (r <= 0.0) return -infinity;
    return 20.0 * std::log10(r / l);
}

double pan_of_level_difference(double diff_db) {
    const double theta = std::atan(std::pow(10.0, diff_db / 20.0));
    return theta * 4.0 / std::numbers::pi - 1.0;
}

pan_and_level pan_of_amplitudes(double left_amp, double right_amp) {
    assert(left_amp >= 0.0 && right_amp >= 0.0 && left_amp + right_amp > 0.0);
    const double theta = std::atan2(right_amp, left_amp);
    return {.pan = theta * 4.0 / std::numbers::pi - 1.0,
            .level_db = 10.0 * std::log10((left_amp * left_amp + right_amp * right_amp) / 2.0)};
}

double channel_phase_offset_rad(double freq_hz, double delay_us, channel_side side) {
    constexpr double us_per_s = 1e6;
    return -side_sign(side) * std::numbers::pi * freq_hz * delay_us / us_per_s;
}

patch channel_patch(const patch& p, channel_side side) {
    patch out = p;
    if (!is_stereo(p)) return out;
    out.note.channels = 1;
    for (partial& q : out.partials) {
        q.phase_rad += channel_phase_offset_rad(q.freq_hz, q.place.delay_us, side);
        place_envelope(q.env, q.place, side);
        q.place = {};
    }
    for (noise_band& b : out.noise) {
        place_envelope(b.env, b.place, side);
        b.place = {};
    }
    return out;
}

}  // namespace wane

// The envelope of a noise band's attack burst from its short-window level track.
//
// The noise model measures the attack (analysis/noise_model.hpp) with a short Hann window (4 ms,
// hop 1 ms). A mallet's or pick's burst lives only a few such windows: marimba_fs4's burst above
// 5.6 kHz holds about 3 ms and falls 16 dB in the next 7 ms, then the band lies 20 dB lower for
// tens of milliseconds. A straight line fitted to the frame levels from the peak on (the partials'
// envelope fit) compromises between the two: its peak stood 6 dB under the frames, its T60 was 5x
// too long. So the burst is fitted as what the frames measure of it: a frame centred at c sees the
// band's power g(t) weighted by the window's power, sum w(t - c)^2 g(t) / sum w^2 (expected
// periodogram of noise whose power changes slowly against a period of the band; the same rule as
// analysis/floor_onset.hpp), with
//     g(t) = P (t / a)^2 for 0 <= t < a (the envelope's linear amplitude rise),
//            P for a <= t < a + h (a hold), P 10^(-6 (t - a - h) / T60) after (core/envelope.hpp),
// zero before the onset. a: where the loudest frame says the burst ends its rise (its centre less
// half a window, as the partials' fit); h and T60 by least squares in dB over the frames from the
// first whose window lies wholly after the onset to where the level has fallen fall_db under the
// loudest frame or to within floor_margin_db of the floor under it; P in closed form (the mean
// difference). Levels, measured and modelled alike, go in 3-frame power means: one frame of a few
// bins scatters by many dB, and a single dip ended the span or bent the fit. The hold is searched on a grid of hold_step_s, T60 on a log grid refined by golden
// section; a burst whose best T60 lies at max_t60_s does not die within the attack and is none.
#pragma once

#include <cstddef>
#include <optional>
#include <span>

#include "core/envelope.hpp"
#include "spectrum/window.hpp"

namespace wane {

struct burst_frames {
    window_kind window = window_kind::hann;
    double window_s = 0.0;
    double hop_s = 0.0;               ///< frame i is centred at i * hop_s, seconds from the onset
    std::span<const float> level_db;  ///< measured band level per frame, dB
    /// Floor under each frame, dB (what the band holds without the burst); empty: none.
    std::span<const float> floor_db;
    std::size_t first = 0;            ///< the first frame whose window lies wholly after the onset
};

struct burst_fit_params {
    /// The fit ends where the level has fallen this far under the loudest frame (the burst's
    /// energy is in its first 20 dB; what lies lower is the band's floor or another stage) ...
    double fall_db = 20.0;
    /// ... or comes within this of the floor under it (the noise model's floors carry margins of
    /// their own: a partial's skirt + 6 dB, the spread noise's spill - 3 dB; with the partials'
    /// fit's 8 dB on top, test_noise's broadband burst at 3981 Hz ended after two frames).
    double floor_margin_db = 3.0;
    /// The loudest frame is sought among the frames centred up to this long after the first
    /// one fitted: a mallet's, hammer's or pick's contact noise peaks within a few milliseconds
    /// (reasoned choice; dulcimer_g4's bands at 4.5-9 kHz peak again 35-50 ms later, fitted as
    /// bursts rising from the onset they added 0.25 dB to its log-spectral distance).
    double max_peak_s = 0.015;
    /// ... and contact noise rises fast: a band whose loudest frame there says it still rises
    /// after max_attack_s (the loudest frame's centre less half a window) is no burst but a swell
    /// (reasoned choice from the 17 real notes: the bursts' rises split into 0-6 ms and 8-16 ms;
    /// banjo_g3's bands at 2.2 and 4.5 kHz rise over 10-11 ms and fall with T60 0.2-0.44 s, and
    /// played as bursts they lifted the copy's share above 4 kHz in its first 10 ms from 3.3 to
    /// 4.7 dB over the recording's).
    double max_attack_s = 0.008;
    double min_t60_s = 0.008;
    double max_t60_s = 0.5;
    /// Longest hold searched, and its grid step, seconds.
    double max_hold_s = 0.008;
    double hold_step_s = 0.0005;
    /// Fewest frames a fit takes.
    std::size_t min_frames = 3;
};

/// Level a frame centred at centre_s measures of the burst above with P = 0 dB (rule above), dB;
/// -inf when the window sees none of it.
double burst_framed_level_db(double attack_s, double hold_s, double t60_s, window_kind window, double window_s,
                             double centre_s);

struct burst_fit {
    envelope env;            ///< attack a, peak P, a held segment of h when h > 0, then the decay of T60
    double fit_end_s = 0.0;  ///< the last frame fitted: past it the envelope is the line run on
};

/// The burst's fit, or empty when fewer than min_frames frames stand clear or it does not die
/// within max_t60_s.
std::optional<burst_fit> fit_burst(const burst_frames& frames, const burst_fit_params& params);

}  // namespace wane

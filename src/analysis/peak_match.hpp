// The copy's level: one gain for the whole patch (note.gain_db), chosen from the copy's peak.
//
// The partials are fitted on the recording itself, so at gain 0 they already have its level (the
// least-squares one). The gain leaves that level only as far as the copy's peak needs: its
// expected peak is brought within peak_tolerance_db of the recording's. The copy's peak is the
// partials' peak plus what the noise bands add at that instant, and the noise is a random draw
// (synthesis/noise_render.hpp): on a note with loud bands near its partials one draw adds 2 dB to
// the peak where another adds nothing. So the expected peak is the median over
// peak_match_params::draws draws, and the partials' level does not follow one draw's luck. Only
// the safety limit (the default render must stay under full scale) looks at the one draw a
// default render plays, and where that draw alone would hold the partials down, the noise gives
// way first (match_peak).
#pragma once

#include <cstdint>
#include <span>

#include "core/patch.hpp"

namespace wane {

/// The copy's peak is kept this far under full scale at least (peaks between samples and other
/// output rates).
inline constexpr double peak_headroom_db = 0.3;

/// The copy's expected peak may lie this far (dB) from the recording's before the gain moves the
/// fitted level: half the 1 dB the issue allows a copy's peak, the other half left to the draw.
inline constexpr double peak_tolerance_db = 0.5;

/// The default render's peak (its one draw) stays within this (dB) of the recording's: where the
/// draw happens to be quiet, the gain rises that far over the expected peak's (the issue allows
/// a copy's peak 1 dB off; 0.1 dB left for the render at other rates and rounding).
inline constexpr double max_default_peak_miss_db = 0.9;

/// A copy that peaks lower than its recording is raised by at most this (dB): further under, the
/// fit has missed the note's loudest part, and a gain would only hide it.
inline constexpr double max_peak_raise_db = 6.0;
/// The default render of a copy (and its render at the recording's rate) peaks at least this far
/// under full scale (dB), whatever its noise draw adds.
inline constexpr double default_render_margin_db = 0.1;

/// The noise draws the expected peak is taken over.
struct peak_match_params {
    /// Seeds first_seed .. first_seed + draws - 1 (render_params::noise_seed); odd, so the median
    /// is one draw's peak. 9 draws: the median's spread over disjoint seed sets is measured in
    /// tests/unit/test_peak_match.cpp.
    std::uint64_t first_seed = 1;
    int draws = 9;
    /// The seed of the render that must stay under full scale: the default render's (render_params
    /// and `wane render --seed` default to 1).
    std::uint64_t default_seed = 1;
    /// The other draws are rendered first with their loud bands only, the quiet ones' bound
    /// (synthesis/render_bound) standing for them, and in full only where that leaves the
    /// expected gain open: the same gain as the full draws'. Off: always in full (the tests'
    /// reference).
    bool settle_by_bound = true;
};

/// Draws peak only where the default draw comes within this of its own peak (dB), and up to
/// peak_window_margin_s later: the other draws are rendered over that span only.
inline constexpr double peak_window_db = 6.0;
inline constexpr double peak_window_margin_s = 0.02;

struct peak_match_result {
    double gain_db = 0.0;           ///< the gain to set (note.gain_db)
    /// The gain nearest 0 (the fitted level) that brings the expected peak within
    /// peak_tolerance_db of the target; the one the partials should have.
    double expected_gain_db = 0.0;
    /// How far the default draw's safety limit holds gain_db under expected_gain_db (>= 0; a
    /// quiet default draw can put gain_db over it).
    double held_down_db = 0.0;
};

/// Gain (dB): the one nearest 0 that brings the copy's expected peak (the median over the draws
/// of the peak of its render at default_output_rate_hz, p's own gain left out) within peak_tolerance_db
/// of the target, the recording's peak (note[0] at the onset) or -peak_headroom_db dBFS when that
/// is lower; up by at most max_peak_raise_db when the copy falls short (an onset transient the
/// partials carry only in part); at least so high that the default draw's render peaks within
/// max_default_peak_miss_db of the recording's peak at the source rate; and never so high that the
/// default draw's render, at the source rate or at default_output_rate_hz, peaks within
/// default_render_margin_db of full scale. Rendered as the file keeps the patch (rounded numbers).
peak_match_result match_copy_peak(const patch& p, std::span<const float> note, double sample_rate_hz,
                                  const peak_match_params& params = {});

/// match_copy_peak's gain.
double peak_matching_gain_db(const patch& p, std::span<const float> note, double sample_rate_hz,
                             const peak_match_params& params = {});

/// p's gain, or where its default render or its render at sample_rate_hz (when renderable and not
/// the default rate), every channel as render_channels makes them and the file keeps p, would
/// peak within default_render_margin_db of full scale, the gain (at the file's 0.01 dB step)
/// that keeps them that far under. For a
/// stereo patch, whose gain comes from each channel's match_copy_peak: those render each channel
/// as a mono patch with its own noise draw, the stereo render draws the channels' noise with
/// their coherence, and its peak is another draw's (piano_fs3_stereo with its fundamental's
/// group centred: +0.04 dBFS, refused).
double render_limited_gain_db(const patch& p, double sample_rate_hz, const peak_match_params& params = {});

/// Where the default draw alone holds the partials more than max_noise_hold_db under the gain
/// of the expected peak, every band is turned down by noise_step_db at a time, at most
/// max_noise_cut_db, until it does not (the partials keep the expected peak's gain).
inline constexpr double max_noise_hold_db = 0.5;
inline constexpr double noise_step_db = 1.0;
inline constexpr double max_noise_cut_db = 6.0;

/// Sets p.note.gain_db from match_copy_peak, with the noise stepped down as above.
void match_peak(patch& p, std::span<const float> note, double sample_rate_hz, const peak_match_params& params = {});

}  // namespace wane

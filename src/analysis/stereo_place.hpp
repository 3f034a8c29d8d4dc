// Stereo analysis: a patch fitted on the mix of two channels (analysis/analyze.hpp) gets each
// partial's and band's place between the channels (core/stereo.hpp: pan, delay, spread, noise
// coherence), fitted on the channels themselves.
//
// Partials: with every partial's frequency and envelope shape fixed by the mix, the complex
// amplitudes of all partials are fitted by least squares on each channel's first fit_span_s
// (modes/damped_mode.hpp: damped modes, or the envelope's own shape where it is not one
// exponential over the span). Channel c's amplitude relative to the mix model, r_c, gives the level
// difference (|r_R| / |r_L|, as a pan), the level (10 log10((|r_L|^2 + |r_R|^2) / 2) added to
// peak_db) and the phase difference arg(r_R) - arg(r_L) = -2 pi f delay. A steady partial's delay
// is known only modulo its period 1/f: the value nearest the note's broadband delay (the lag of the
// channels' cross-correlation peak over the first reference_span_s, within +-max_reference_delay_s)
// is taken. Partials that are not yet sounding at the start (their shape over the span stays
// below min_shape_in_span of their peak) get their place from a later span
// [late_start_s, late_start_s + fit_span_s] where they sound, else stay centred.
//
// Over the note: the same fit on a span every drift_step_s (up to drift_spans of them) gives each
// channel's level of a partial placed on the first span again; its pan follows the channels'
// energies over the first second and its spread (a level difference moving at a steady rate) is
// kept only where a line through all the spans where it sounds explains them
// (analysis/stereo_drift.hpp). Two spans' difference, extended to the end of the note, made a
// beating partial's swing a drift of tens of dB.
//
// Noise bands: the residual of each channel (the channel minus its own partials, which start when
// the channel's sound arrives: the broadband delay) is measured in the noise bands over the first
// noise_span_s: each band's energy in the floor frames (analysis/noise_model.hpp) whose window lies
// wholly inside the residual (as the mono noise model fits; a window across a cut end sees the
// residual's loud low content through a step, over every band above it), and before the first of
// them, in the onset stretch where a struck note holds most of its high bands' energy, by the noise
// model's short attack window (the bands wide enough for it), never above the recording's band
// power there. The band's pan follows the channels' energies P_L, P_R, its coherence is
// C / sqrt(P_L P_R) with the cross energy
// C = 2 P_M - (P_L + P_R) / 2 from the energy P_M of the residuals' mean, and its peak_db moves by
// 10 log10(((P_L + P_R) / 2) / P_M), so each channel keeps its measured energy.
#pragma once

#include <span>

#include "analysis/analyze.hpp"
#include "analysis/noise_model.hpp"
#include "analysis/stereo_drift.hpp"
#include "core/patch.hpp"

namespace wane {

struct stereo_place_params {
    double fit_span_s = 0.15;
    double min_shape_in_span = 0.5;
    double late_start_s = 0.3;
    double drift_step_s = 0.3;   ///< spans for the pan and spread start every this many seconds
    int drift_spans = 12;        ///< at most this many (3.45 s of note)
    double audible_db = 40.0;    ///< a span counts while the partial is within this of its first span's level
    drift_params drift{};
    double reference_span_s = 0.05;
    double max_reference_delay_s = 0.003;
    double noise_span_s = 1.0;
    noise_model_params noise{};  ///< how the residual's bands are measured (as the mono analysis does)
};

/// The lag (seconds, right behind left when > 0) of the cross-correlation peak of the channels over
/// their first span_s, within +-max_delay_s, refined by a parabola through the peak and its
/// neighbours. 0 when either channel is silent there.
double broadband_delay_s(std::span<const float> left, std::span<const float> right, double sample_rate_hz,
                         double span_s, double max_delay_s);

/// Makes p (fitted on the mean of left and right; both start at the note's onset) a stereo patch:
/// channels = 2 and every part placed as described above. p's gain_db is left as it was.
void place_stereo(patch& p, std::span<const float> left, std::span<const float> right, double sample_rate_hz,
                  const stereo_place_params& params);


/// The analysis of a two-channel note: analyze_note on mix (the mean of left and right, as
/// read_audio gives it), then place_stereo on the channels from the note's onset (within
/// params.start_s .. end_s), and the copy's gain set so neither channel peaks above its recording
/// (peak_matching_gain_db per channel, the lower of the two) when params.match_peak.
analysis_result analyze_stereo_note(std::span<const float> mix, std::span<const float> left,
                                    std::span<const float> right, double sample_rate_hz,
                                    const analysis_params& params, const stereo_place_params& stereo);

}  // namespace wane

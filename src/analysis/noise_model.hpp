// The stochastic part of a note (Serra and Smith 1990): what is left after the partials'
// resynthesis is subtracted from the source, measured in the one-third-octave noise bands of
// core/noise_bands.hpp and fitted with the same envelope form and fit as a partial.
//
// Two measurements, two kinds of band:
//  - the floor between the partials: a Blackman-Harris STFT long enough to resolve the partials
//    (floor_window_s), and in each band the median power of the bins away from every partial's
//    main lobe, scaled to the mean (for noise each bin's power is exponentially distributed, so
//    the median of n bins is the mean times the expected median of n unit exponentials). The median
//    ignores what the subtraction left of a partial and any peak the tracker did not keep, so only
//    the noise between the partials is measured. Hop 5 ms (or window / 16), no zero padding (the
//    bins then are independent, as the median's scale assumes); past the first 0.3 s only a frame
//    every 5/16 window is measured, those between on the line in dB between them (the floor
//    changes slowly there; one frame in five). Fitted on the frames
//    whose window lies wholly inside the recording (the first line run back to the onset), over
//    the floor of what the neighbouring bands leak into the band through the window
//    (analysis/band_leakage.hpp).
//  - the attack: a short Hann STFT (4 ms, hop 1 ms) over the first 2 attack_span_s, mean power of
//    all the band's bins, in the bands at least attack_min_bins bins of that window wide. Where the
//    first attack_span_s stands attack_above_floor_db over the median of the second (what the
//    short window sees of the partials' remainder and the floor once the burst is over), the burst
//    is fitted as a band of its own (same edges, a short envelope), played on top of the floor
//    band, which then starts after the floor window's smear of the onset. Its leakage floor is a
//    partial's skirt, while spread noise's spill over the band's own density is taken off its
//    level (a broadband burst fills its neighbours as much as they fill it), and frames whose
//    window reaches before the onset count no higher than the first frame wholly after it.
#pragma once

#include <span>
#include <vector>

#include "analysis/burst_fit.hpp"
#include "core/patch.hpp"
#include "fitting/envelope_fit.hpp"

namespace wane {

struct noise_model_params {
    /// Floor analysis hop, seconds: hop_s, or window / floor_hops_per_window when that is longer
    /// (reasoned choice: a window of 60-300 ms smooths the level over its length anyway; measured,
    /// wane analyze guitar_nylon_d3 0.86 -> 0.53 s CPU against a 5 ms hop).
    double hop_s = 0.005;
    double floor_hops_per_window = 16.0;
    /// The noise model measures the floor at every hop over the first floor_dense_span_s after the
    /// onset and after it at the whole number of hops nearest under floor_sparse_hop_windows
    /// windows, the levels between interpolated in dB. Measured against 0.5 s: the same fidelity
    /// medians on the 17 real and 40 held-out notes, every note's LSD within 0.05 dB and SNR100
    /// within 0.01 dB (0.25 s put dulcimer_g4 at LSD 9.10 dB, +0.04); the noise model 112.7 ->
    /// 105.8 M instructions on the synthetic 4 s note (f0 110 Hz: 15 fewer floor frames of both
    /// the residual and the recording).
    double floor_dense_span_s = 0.3;
    /// Measured against a quarter window (after the 0.3 s span; 5 hops of window / 16, was 4): the
    /// same fidelity medians (17 notes LSD 4.48, SNR100 14.74 -> 14.73, worst 9.07; 40 notes LSD
    /// 4.99, SNR100 15.51, worst 9.31), every note within 0.04 dB LSD and 0.14 dB SNR100
    /// (guitar_nylon_d3 -0.14); the noise model 105.8 -> 100.8 M instructions on the synthetic
    /// note. 6 hops (97.7 M) held the fidelity guard but fitted test_noise's empty 178-224 Hz band
    /// a swell 3.7 dB over the floor's energy (test limit 3 dB); 8 hops (93.3 M) put the 17
    /// notes' worst LSD at 9.10.
    double floor_sparse_hop_windows = 0.3125;
    /// The floor bands are held under the recording's own levels (the residual louder than the
    /// recording is the subtraction's error) on the frames centred within this long after the
    /// onset. Measured on the 17 real notes against the whole note: the same fidelity medians,
    /// rhodes_c3's LSD 1.19 -> 1.26 dB, the others within 0.02 dB; the recording's floor frames
    /// after it left out (the noise model 172 -> 148 M instructions on the synthetic 4 s note).
    double recording_cap_span_s = 0.5;
    /// The floor window lasts floor_window_spacings / f0 (or, without one, / the median spacing of
    /// neighbouring partials), so a partial's main lobe (+-4 bins of Blackman-Harris) leaves bins
    /// free between partials;
    /// clamped to [min_floor_window_s, max_floor_window_s].
    double floor_window_spacings = 24.0;
    double min_floor_window_s = 0.06;
    double max_floor_window_s = 0.3;
    /// ... and at most this share of the note's length (not under min_floor_window_s): a note
    /// shorter than a few floor windows has too few frames to fit a band's envelope on (a 0.21 s
    /// clavinet note, f0 131 Hz, window 0.18 s, got no band at all: log-spectral distance 24 dB).
    double max_floor_window_share = 0.25;
    /// Bins this close to a partial (in window main-lobe half-widths) are left out of a band.
    double partial_guard_lobes = 1.25;
    /// ... a partial that lasts: one whose envelope has fallen 60 dB under its peak by this time,
    /// or by this share of the note's length if that comes first (the onset fit's short-lived
    /// modes; a 0.21 s clavinet note's partials all fall within 0.5 s), guards no bins and counts
    /// as no partial inside a band: a short mode's bins were left out of the whole note's floor,
    /// so a band holding a few lost its own bins and borrowed other bands' (fit_note_noise).
    double short_partial_s = 0.5;
    double short_partial_share = 0.25;
    /// A band with fewer free bins takes this many free bins nearest its centre (log frequency).
    int min_free_bins = 5;
    /// Attack bands whose fitted peak is further than this below the loudest partial are dropped
    /// (reasoned choice: about the dynamic range of 16-bit audio).
    double keep_within_db = 95.0;
    /// Floor bands are kept down to this level, dB: below the noise of a 24-bit recording's
    /// quantization (-146 dBFS over the whole band; reasoned choice), so what is dropped is
    /// digital silence, while a 16-bit recording's hiss (about -100 dB per band) stays.
    double least_floor_band_db = -140.0;
    // The attack measurement.
    double attack_window_s = 0.004;
    double attack_hop_s = 0.001;
    double attack_span_s = 0.08;
    int attack_min_bins = 2;
    double attack_above_floor_db = 6.0;
    /// The burst's fit (analysis/burst_fit.hpp): a burst that rings longer than its max_t60_s is
    /// left to the floor band, and one that dies faster than about its min_t60_s (two short
    /// windows) cannot be told from what the partials' onset leaves in the residual.
    burst_fit_params burst{};
    envelope_fit_params fit{.max_segments = 3, .min_segment_s = 0.05, .frequency_and_phase = false};
};

struct noise_band_track {
    double low_hz = 0.0;
    double high_hz = 0.0;
    double hop_s = 0.0;           ///< frame i is centred at i * hop_s, seconds from the onset
    std::vector<float> level_db;  ///< band level per frame, dB re RMS 1 (core/noise_bands.hpp)
    /// What the other bands leak into this one per frame, dB as level_db (analysis/band_leakage.hpp;
    /// filled by the noise model before the fit, empty from measure_noise_bands).
    std::vector<float> leak_db;
};

/// How far a floor band's fitted line may stand over the loudest frame it was fitted on, dB
/// (project choice: several times a frame's 3-4 dB scatter). The line stands a little over the
/// frames' dB mean by design (fit_partial matches their mean power), so it may pass the loudest
/// frame by a few dB; one standing more than this over it is the fit running free where the band
/// is near silence (rhodes_c3's 141-178 Hz band: a 1.9 s rise to a peak 35 dB over every level
/// measured in it, flipping between -99 and -65 dB on 1e-6 Hz moves of the partials).
inline constexpr double floor_runaway_db = 10.0;

/// env held to the track it was fitted on (frames first..end-1, frame i at i * hop_s): where its
/// level at a frame's time stands more than floor_runaway_db over the loudest of those frames'
/// levels, the whole envelope is lowered until its highest point there is that loudest level.
envelope held_to_measured(envelope env, const noise_band_track& t, std::size_t first, std::size_t end);

/// env past the frames it was fitted on (fit_end..end-1 of t), whose last slope runs on: from the
/// first frame where its level stands more than floor_runaway_db over the loudest level measured on
/// that frame and every later one (with at least 0.1 s of frames after it), a last segment falls
/// at the rate the measured levels fall over that 0.1 s (when steeper than the line's own). A
/// band's own level is never over what was measured in it: xylophone_c5's 141-178 Hz band of the
/// held-out notes, fitted on two frames before it fell under its neighbours' leakage, was held flat
/// at -70 dB for the whole note over frames falling to -120 dB.
envelope held_past_fit(envelope env, const noise_band_track& t, std::size_t fit_end, std::size_t end);

/// Floor window length for a note with this f0 (0: none) and these partials (rule above), seconds.
double floor_window_s(std::span<const double> partial_freqs_hz, double f0_hz, const noise_model_params& params);

/// Floor band levels of a residual over time (residual[0] is the onset), with the floor window
/// the noise model uses for a note of this f0 (0: none; floor_window_s).
std::vector<noise_band_track> measure_noise_bands(std::span<const float> residual, double sample_rate_hz,
                                                  std::span<const double> partial_freqs_hz, double f0_hz,
                                                  const noise_model_params& params);

/// The same for several residuals of one note (e.g. one per channel), with one plan for all.
std::vector<std::vector<noise_band_track>> measure_noise_bands(std::span<const std::span<const float>> residuals,
                                                               double sample_rate_hz,
                                                               std::span<const double> partial_freqs_hz, double f0_hz,
                                                               const noise_model_params& params);

/// Fits the floor and attack bands of a residual (of partials that start at their peak; with the
/// recording, never above its levels); drops attack bands too quiet to matter (keep_within_db re
/// loudest_partial_db) and floor bands under least_floor_band_db. Bands come out in ascending frequency.
std::vector<noise_band> fit_noise_bands(std::span<const float> residual, double sample_rate_hz,
                                        std::span<const double> partial_freqs_hz, double loudest_partial_db,
                                        const noise_model_params& params, std::span<const float> recording = {});

/// The noise model of a note (note[0] is the onset): the residual note - partials (the render of
/// p's partials, synthesis/render.hpp partial_renderer; also with the partials started at their
/// peak, over the frames near the rises that changes, see model_from in the .cpp) is formed a block at a time and measured
/// as it goes, so it is never held whole (a long file costs the band levels only: 4 bytes per band
/// and hop), then fitted as fit_noise_bands does. Same bands as fit_noise_bands on the residual
/// held whole (the blocks start at multiples of the renderer's anchor length: the same samples).
std::vector<noise_band> fit_note_noise(std::span<const float> note, double sample_rate_hz, const patch& p,
                                       const noise_model_params& params);

}  // namespace wane

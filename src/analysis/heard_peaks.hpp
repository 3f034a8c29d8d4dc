// Each partial's constant frequency from the recording's own long spectrum: where a long FFT of the
// note's first second finds the partial, so a copy (and a transposed copy) puts its partials where
// the recording's were.
//
// fitting/partial_freq gives each partial the peak of its track's own spectrum over the same span.
// That spectrum is built from STFT frames a few tens of ms long, so when a partial is a group of
// components closer than the STFT window resolves (a course of two or three strings, a string
// section in unison, a drum head's split mode), the track follows a mixture and its peak can sit on
// a weaker member of the group. Here the recording itself is transformed over the span, and a
// partial that stands alone for its neighbourhood moves to the strongest peak of that
// neighbourhood, or to the centre of the peaks nearly as strong as it (group_within_db).
#pragma once

#include <optional>
#include <span>
#include <vector>

#include "analysis/cut_tail.hpp"
#include "core/patch.hpp"
#include "fitting/envelope_fit.hpp"
#include "modes/narrowband.hpp"
#include "pitch/root.hpp"
#include "tracking/track.hpp"

namespace wane {

struct heard_peak_params {
    /// The span: 0.1 s to 1.1 s after the onset; a note shorter than span_end_s + 0.1 s uses
    /// short_start_s to its end (the span the real notes' README measures f0 over; common
    /// practice: after the strike's transient, where a plucked or struck note's pitch is heard).
    double span_start_s = heard_span_start_s;  // the heard span's one home: pitch/root.hpp
    double span_s = heard_span_s;
    double short_start_s = 0.05;
    /// Shorter: nothing is moved. 0.15 s (was 0.25): a note of 0.2 s after its onset has its
    /// partials read where the span's spectrum puts them, as the pitch check reads a short note
    /// (tests/cli/pitch_check.py: 0.05 s to its end); clavinet_c4 of tools/more_notes.py (0.21 s)
    /// kept its tracks' frequencies up to 1.05 cents off those peaks, and a copy transposed by a
    /// fifth or an octave played them there (now 0.14 cents; first-100 ms SNR 13.99 -> 14.40 dB).
    double min_span_s = 0.15;
    /// Peaks are added (add_heard_peaks) only over a span at least this long (the old min_span_s):
    /// over clavinet_c4's 0.16 s span the patch went 53 -> 62 partials and its log-spectral distance rose
    /// 9.40 -> 9.67 dB (8 kHz band 11.37 -> 12.27), where the moves alone took it 9.46 -> 9.40.
    double min_add_span_s = 0.25;
    /// How far a partial may move, in main-lobe half-widths (2 / T Hz for a Hann window over T s):
    /// two, the distance inside which a span of T s cannot tell two components apart cleanly.
    double capture_half_widths = 2.0;
    double max_move_cents = 50.0;   ///< never more than a quarter tone: the partial keeps its note
    /// The peak must carry the partial's own level over the span within this (dB): a peak much
    /// stronger or weaker than the partial is another partial's.
    double level_gate_db = 12.0;
    /// Partial 1 (the one the root is read from, pitch/root.hpp): peaks within reach and within
    /// this many dB of the strongest are one group (a beating pair, a course of strings resolved
    /// by the span), and the partial moves to their power-weighted mean frequency, the pitch the
    /// group is heard at, not to whichever member happens to be a little louder (piano_d6 of
    /// tools/more_notes.py: its fundamental's two peaks 586.98 and 588.84 Hz, 0.2 dB apart, over
    /// 0.1-1.1 s; 0.2 s frames read 587.9 Hz throughout; root 588.84 -> 587.92 Hz, first-100 ms
    /// SNR 5.86 -> 9.77 dB). 3 dB (reasoned choice): members that close beat with a level swing
    /// of 15 dB or more, heard as one tone. Only partial 1: on every partial, the 17 shared notes'
    /// first-100 ms SNR median fell 13.80 -> 13.72 dB and the 40 more notes' 11.65 -> 11.57 (bars'
    /// and bells' modes, piano_d2), where a copy's single partial follows the louder member better.
    double group_within_db = 3.0;
    /// FFT size >= zero_padding x span length. 4 (was 8): peaks read by log-parabolic
    /// interpolation between bins a quarter of the main-lobe half-width apart; half the transform
    /// and its bins to scan (callgrind on the synthetic note: heard_spectrum 25.7 -> 14.8 M
    /// instructions) for medians of LSD and first-100 ms SNR unchanged on the 17 shared and 40
    /// held-out notes (no note's LSD worse by more than 0.09 dB nor its SNR by more than 0.21 dB).
    int zero_padding = 4;
    /// Peaks the tracks missed (add_heard_peaks): within this many dB of the span's strongest
    /// peak, ...
    double add_within_db = 50.0;
    /// ... the highest point within +-add_isolation_reaches capture distances (a side lobe or a
    /// skirt of a stronger peak is not a partial), ...
    double add_isolation_reaches = 2.0;
    /// ... standing this far above the median of the span's spectrum within +-add_floor_hz ...
    double add_clear_db = 15.0;
    double add_floor_hz = 50.0;
    /// ... and with no partial within one main-lobe half-width (2 / T Hz: a partial further off
    /// makes a peak of its own) carrying its level within level_gate_db; at most this many per
    /// note, strongest first.
    int max_added = 8;
    /// Late companions (merge_late_companions): a partial whose level peaks this late (s after
    /// the onset, the span's start: after the strike) ...
    double companion_start_s = 0.1;
    /// ... within this many main-lobe half-widths of a stronger partial: one heard partial.
    double companion_half_widths = 1.0;
    double band_rate_hz = 80.0;     ///< the narrow band's rate: points 12.5 ms apart, as the STFT hop
    double floor_quantile = 0.1;    ///< the band's noise floor: this quantile of its level over the note
    /// A track's fit shorter than this (seconds) that holds its level (follow_band_past_fits) is
    /// continued by the narrow band's decay: a few frames between the attack's noise and the
    /// track's end say nothing about how the partial decays.
    double short_fit_s = 0.1;
    /// ... and that band's half-width, Hz: at most this, wide enough that its own smear (about
    /// 1 / width seconds) does not slow a decay of 100 dB/s; at most half the distance to the
    /// nearest other partial (so the band reads this one); at least the capture distance.
    double short_fit_band_hz = 20.0;
    /// A fit whose envelope after its end stands this many dB over that band's level ...
    /// (the survey's threshold, tools/survey_held.py: a partial 6 dB over the recording is heard
    /// as a tone the note does not hold; reasoned choice) ...
    double over_band_db = 6.0;
    /// ... for longer than this, seconds (a moment of excess is a beat's trough or a noise dip) ...
    double over_band_s = 0.1;
    /// ... the band's level the power mean of its points within +-this, seconds.
    double band_smoothing_s = 0.05;
};

/// The recording's magnitude spectrum over the span (Hann, zero padded), made once for both steps
/// below. Empty (no bins) when the note is too short for a span.
struct heard_span_spectrum {
    std::vector<double> mag;  ///< |X[k]| * 2 / sum(w): a steady sinusoid's amplitude at its peak bin
    double bin_hz = 0.0;
    double start_s = 0.0;     ///< the span, seconds after the onset
    double end_s = 0.0;
};
heard_span_spectrum heard_spectrum(std::span<const float> note, double sample_rate_hz, const heard_peak_params& params);

/// The whole note's spectrum the narrow bands of follow_band_past_fits and add_heard_peaks are read
/// from (zero padded past the band's wrap), made by the first of them that needs it and reused by
/// the other when it reads the same samples (the same span of the same note).
struct band_spectrum_cache {
    std::span<const float> note;  ///< the samples it was made of
    std::optional<note_spectrum> spectrum;
};

/// Moves partial i (tracks[i] its track; nullptr: left alone) to the strongest local peak of the
/// Hann-windowed spectrum of note (samples from the onset on) within the capture distance, when
/// no partial stronger over the span lies within that distance of it, and re-anchors its phase
/// at t = 0 to the new frequency. Returns how many partials moved by more than 0.01 cents.
int move_to_heard_peaks(patch& p, std::span<const partial_track* const> tracks, const heard_span_spectrum& spectrum,
                        const heard_peak_params& params);

/// A partial kept by merge_late_companions, its envelope spliced from the group's.
struct merged_partial {
    std::size_t index = 0;     ///< in the patch before the merge
    double fit_start_s = 0.0;  ///< the stretch its envelope stands for, seconds from the onset:
    /// to the fit's end of the member whose envelope runs on at the end (the note's end when that
    /// member's track was cut by the file's end, or without fit ends)
    double fit_end_s = 0.0;
};

struct merge_result {
    std::vector<std::size_t> removed;  ///< indices before the merge, ascending
    std::vector<merged_partial> kept;
};

/// Two partials closer than one main-lobe half-width of the span (2 / T Hz) make one peak of the
/// span's spectrum, at a place set by their relative phase and levels; a transposition scales
/// their beat rate, so that peak does not move by the pitch ratio. Where one of them is a late
/// companion (its level peaks after companion_start_s: a swell beside a partial, as a second
/// player of a section in unison, a drum head's split mode or a wandering track gives; two present
/// from the strike are a beating pair and stay apart), the two are one heard partial: the
/// stronger over the span (tracks[i]) keeps its frequency (the heard peak) and harmonic; its
/// envelope is the earlier member's until the later one is first louder, then the later one's
/// (each as fitted to its own track; the tracker's late fragment of a partial often starts where
/// the first fragment ends), and its phase the earlier member's; the companions are erased from p.
/// Only partials with a track take part. fit_end_s: each partial's fit's end, seconds from the
/// onset (empty: the note's end for all).
merge_result merge_late_companions(patch& p, std::span<const partial_track* const> tracks,
                                   std::span<const double> fit_end_s, std::span<const float> note,
                                   double sample_rate_hz, const heard_peak_params& params);

/// Partials whose fit (fitted[i], i in the patch's order) ended before the note did, and either
/// whose track ended before the file did (a merged partial's, fitted[i].track null: as its fitted
/// stretch says, merged_partial), whose fitted stretch is shorter than short_fit_s and whose last
/// segment does not fall (fit_partial holds a rising last slope level), or whose envelope after
/// the fit's end stands more than over_band_db over the level of the narrow band around it (the
/// power mean within +-band_smoothing_s) for longer than over_band_s: the recording shows the
/// partial decaying faster than its fit's last slope runs on (a slope read off a few frames under
/// the attack's noise, a beat's rise held level), and the band holds the partial and whatever lies
/// near it, so the partial cannot be louder. From the fit's end on, such a partial follows the
/// decay slopes of that band over the whole note (band as in add_heard_peaks, fitted with
/// fit_params; its segment at the fit's end runs from there), when the band's last slope falls.
/// Returns how many partials were changed.
int follow_band_past_fits(patch& p, std::span<const cut_part> fitted, std::span<const float> note, double sample_rate_hz,
                          const heard_span_spectrum& s, const heard_peak_params& params,
                          const envelope_fit_params& fit_params, band_spectrum_cache* cache = nullptr);

/// Adds a partial for each strong peak of the same span spectrum that no partial accounts for
/// (a mode the tracker missed or fitted far below its level): its level over the whole note from
/// a narrow band of half-width = the capture distance around the peak (modes/narrowband, note zero
/// padded so the band's circular wrap falls on silence), fitted like a track (fit_partial with
/// fit_params), at the peak's frequency. Returns how many were added (appended, harmonic 0).
int add_heard_peaks(patch& p, std::span<const float> note, double sample_rate_hz, const heard_span_spectrum& spectrum,
                    const heard_peak_params& params,
                    const envelope_fit_params& fit_params, band_spectrum_cache* cache = nullptr);

}  // namespace wane

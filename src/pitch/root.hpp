// The root note of an analysed sound: the pitch a sampler maps it to, stated apart from the
// analysis model (which may number no harmonics at all, as for a bar or a bell).
#pragma once

#include <limits>
#include <span>

#include "core/patch.hpp"

namespace wane {

/// One partial as the root finder sees it.
struct root_mode {
    double freq_hz = 0.0;
    double level_db = 0.0;  ///< peak level, dBFS
    int harmonic = 0;       ///< its number on the fitted series, 0 when off it
    /// Mean level over the heard span (heard_level_db), dBFS: what is still heard once the strike's
    /// short-lived modes have died. NaN when not known: level_db stands for it.
    double heard_db = std::numeric_limits<double>::quiet_NaN();
    /// Amplitude over the heard span as its spectrum weighs it (span_weighted_amplitude), dB:
    /// the weight of a split nominal's members. NaN when not known: heard_db stands for it.
    double span_db = std::numeric_limits<double>::quiet_NaN();
};

struct root_params {
    /// Modes within this of the strongest count as strong (lowest strong mode, bell partials).
    double strong_below_max_db = 20.0;
    /// A sound without a harmonic series and more strong modes than this has no pitch centre
    /// (a cymbal or a gong's wash; common practice, not from a source).
    int unpitched_min_strong_modes = 16;
    /// A harmonic note's partial 1 is its root when within this of the strongest partial, else the
    /// series' f0 is (common practice: a fundamental 30 dB down is still heard as the pitch).
    double fundamental_below_max_db = 30.0;
    /// Relative tolerance of the bell partial ratios (bells are seldom tuned closer than this).
    double bell_tolerance_rel = 0.025;
    /// A bell without a strong prime is heard at its nominal's octave below, the nominal read as
    /// the power-weighted mean frequency of the modes within this of the chosen one, each
    /// weighted by its amplitude as the heard span's spectrum shows it (span_db): a split mode (a
    /// tube's or a bell's two close components) or a strike transient beside it is one tone to
    /// the ear, heard at the group's centre as analysis/heard_peaks reads a harmonic note's
    /// partial 1 from that spectrum (tubular_c7 of tools/more_notes.py: its nominal the
    /// louder-peaked 2106.87 Hz, peak -11.6 dB, over the span -40.9 dB (mean level -23.1 dB, most
    /// of it in the span's first tenth), beside 2095.64 Hz, peak -25.3 dB, over the span -30.9
    /// dB; the recording's mode 4 over the span peaks at 2095.64 Hz, 12 dB over 2106.87 Hz). 1% (reasoned choice): components that close (20 Hz at 2 kHz, under a tenth
    /// of the critical band there) beat rather than sound apart, and a bell's partials lie further
    /// apart than that (the nearest pair of a church bell's, prime and tierce at 1 : 1.2, 20%).
    double nominal_group_rel = 0.01;
    /// A note without a fitted series whose strong modes above the lowest lie on 2, 3, ... times
    /// one f (upper_series_hz in root.cpp): pizzicato strings playing in unison (pizz_a3 of
    /// tools/more_notes.py: a fundamental at 113.7 Hz, 2.6% over the 110.9 Hz its partials 2-4
    /// agree on, left the tracker without a series). Searched this far (relative) from n times the
    /// lowest mode, for n up to upper_series_max_n, at least upper_series_min_members of them
    /// (2 and 3 among them), each within upper_series_fit_rel of the fitted series (the tracker's
    /// labelling tolerance, tracker_tuning.hpp). Reasoned choices.
    double upper_series_search_rel = 0.05;
    int upper_series_max_n = 6;
    int upper_series_min_members = 3;
    /// ... the members among the modes within this of the strongest by heard level (the upper
    /// partials of pizz_e4 sound 20-40 dB under its smeared fundamental group).
    double upper_series_below_db = 40.0;
    double upper_series_fit_rel = 0.02;
};

struct root_estimate {
    double freq_hz = 0.0;  ///< 0 when unpitched
    root_method method = root_method::unpitched;
};

/// The root of a sound from its partials and its fitted series (series_f0_hz = 0 when the analysis
/// found no harmonic series). In this order (with an f0 hint, step 2 comes first; no series and
/// more than unpitched_min_strong_modes strong modes, like a cymbal, is unpitched before step 1):
/// 1. bells: strong modes at 2 : 3 : 4 times a strike note s (nominal, twelfth, upper octave)
///    with the minor-third tierce at 1.2 s also strong and nothing strong below the hum s / 2:
///    the root is s = nominal / 2, the strike note as bell tuners name it, an octave below the
///    nominal and at the prime of a well-tuned bell (Fletcher and Rossing 1998, ch. 21: the
///    prime's own frequency when a strong prime lies within bell_tolerance_rel of s); the
///    ear hears it as the missing fundamental of the nominal, twelfth and upper octave (Terhardt
///    and Seewann 1984); without a strong prime, N is read as the heard centre of the modes
///    within nominal_group_rel of the nominal (a split mode is heard as one tone);
/// 2. a harmonic or stretched series: its fundamental as measured, the strongest partial numbered
///    1 when within fundamental_below_max_db of the strongest partial, else series_f0_hz
///    (harmonic_series, or f0_hint when the series was started from the user's --f0);
/// 3. otherwise, where the modes above the lowest strong one (by heard level) lie on 2, 3 and
///    more times one f (upper_series_* below): that f, the series' fundamental (strings in unison);
/// 4. otherwise (tuned bars, timpani, tines): the lowest mode strong by its heard level, the note's
///    nominal pitch (a tuned bar's nominal pitch is its lowest mode: Fletcher and Rossing 1998,
///    ch. 19); strong by the heard level, not the peak, since a mallet's hard strike can put
///    short-lived upper modes over the fundamental for a few milliseconds (a glockenspiel's).
root_estimate find_root(std::span<const root_mode> modes, double series_f0_hz, bool from_hint,
                        const root_params& params = {});

/// The heard span of a note: 0.1 s to 1.1 s after the onset, the span the long spectrum measures
/// (analysis/heard_peaks) and the real notes' README measures f0 over (common practice: after the
/// strike's transient, where a plucked or struck note's pitch is heard).
inline constexpr double heard_span_start_s = 0.1;
inline constexpr double heard_span_s = 1.0;
inline constexpr double heard_span_end_s = heard_span_start_s + heard_span_s;  // 1.1, the same double

/// Hann-weighted mean amplitude (linear) of an envelope over [start_s, end_s]: what a spectrum
/// of that span (Hann window) shows of a steady partial at its peak; the window sampled at 199
/// points, 1/200 of the span apart (the ends, where it is 0, left out).
double span_weighted_amplitude(const envelope& env, double start_s, double end_s);

/// Mean level of an envelope over the heard span, dBFS: 10 log10 of the mean of amp^2 at 101
/// times 10 ms apart over [heard_span_start_s, heard_span_end_s] (the envelope's decay run on past
/// a recording's end, as the patch plays it); -inf when silent there.
double heard_level_db(const envelope& env);

/// The root of analysed partials (find_root over their heard levels, or their peak levels when
/// none sounds over the heard span: a note shorter than 0.1 s), as a note under A4 = 440 Hz.
note_root note_root_of(std::span<const partial> partials, double series_f0_hz, bool from_hint);

/// The root as a note: nearest MIDI note of freq_hz under equal temperament with this A4, and the
/// tuning in cents from it.
note_root root_from_hz(double freq_hz, root_method method, double a4_hz = default_a4_hz);

}  // namespace wane

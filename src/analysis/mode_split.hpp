// The strongest partials as a few close modes each. A struck bar's fundamental with its weak
// neighbour mode a few hertz up, a string whose pitch settles over its first tenth of a second, two
// unison strings: each is one partial to the tracker, whose envelope segments can follow the level
// but not the phase the close modes make together (the copy's first 100 ms drift out of phase).
//
// For each of the strongest partials (within within_db of the loudest, at most max_partials; none
// with another partial within max_offset_hz, a pair already resolved; a twin at the same
// frequency is one sinusoid in two stages and does not count; none with a pitch glide), the
// target is the recording minus every other partial as rendered (synthesis/render.hpp), from the
// onset to the end of the analysed note. The target is moved to 0 Hz at the partial's frequency f
// and low-passed by three running means of D samples (the last one decimating), so the band keeps
// the modes within band_rate_hz / 2 of f (a linear filter moves no pole: a mode z^n comes out as
// (z^D)^m). ESPRIT (modes/esprit.hpp) of order 1 .. max_modes on that band gives the candidate
// poles after the band's first 3 samples (where the note's start sits); their complex amplitudes
// are fitted by least squares on the target at the full rate over the whole note
// (modes/damped_mode.hpp). The order chosen has the least BIC (bic_factor times the usual
// penalty) of the band's residual, among the orders whose modes lie within max_offset_hz of f and
// at least min_separation_hz apart (a pair where both last over min_separation_t60_s), whose
// mode heard most over 0.1-1.1 s stays within
// max_heard_shift_cents of f (every other mode within twice min_separation_hz of that one heard
// min_heard_margin_db less), that decay (T60 under 60 s) and are tame (none louder than the partial's loudest sample by
// max_rise_db: louder ones cancel each other, an ill-conditioned fit).
//
// The partial is replaced by the modes when
//   - they leave at least min_gain_db less residual in the band than the partial as rendered,
//     and no more over the note's first early_s (full band);
//   - the band's level, in late_block_s blocks from late_from_s on while the recording's band
//     stays within late_range_db of its loudest block, follows the recording's no worse (mean
//     |dB| difference) than the partial did, within late_tolerance_db: the fit weighs energy, the
//     ear and the log-spectral distance weigh the quiet tail too.
// The mode with the most energy takes the partial's place (its index: the cut handling finds its
// track there); the others are appended. Each is a partial with an instant onset and one decay
// segment, the partial's harmonic number and stereo place.
#pragma once

#include <span>

#include "core/patch.hpp"

namespace wane {

struct mode_split_params {
    double within_db = 20.0;       ///< partials whose peak is this close to the loudest are tried
    int max_partials = 8;          ///< ... the loudest this many of them
    int max_modes = 4;             ///< largest number of modes a partial becomes
    double band_rate_hz = 200.0;   ///< rate of the band (first null of the running means)
    double max_offset_hz = 12.0;   ///< a mode lies at most this far from the partial
    /// Modes at least this far apart (Hz): 2 / (1 s), two peaks the partials' long spectrum
    /// (0.1-1.1 s, where the partial's frequency was measured) resolves. Closer ones read there as
    /// one peak whose place a transposition moves by other than the pitch ratio (their beat rate
    /// scales), so an instrument made from the patch would play out of tune by a cent or more
    /// (tests/cli/pitch_check.py); pairs that close are left to --split-pairs.
    double min_separation_hz = 2.0;
    /// ... for two modes both with a T60 over this (s): a shorter one has fallen 20 dB by 0.1 s and
    /// its pole's frequency is unsure by several Hz (marimba_fs4's 370 Hz fundamental: a 0.13 s
    /// mode at 367.0 Hz, at 368.2 Hz with the recording one sample later, split refused there).
    double min_separation_t60_s = 0.3;
    /// The mode with the most energy over 0.1-1.1 s lies within this of the partial's frequency
    /// (cents): the partial was placed at the recording's long-spectrum peak over that span
    /// (analysis/heard_peaks.hpp), the pitch an instrument made from the patch is tuned by.
    double max_heard_shift_cents = 0.5;
    /// ... and every other mode within twice min_separation_hz of it is heard at least this much
    /// less there (dB), so the two stay one clear peak when a transposition an octave down halves
    /// their distance (dulcimer_g4's third harmonic, 1181.4 Hz with a mode 2.9 Hz above it 5 dB
    /// under, read 1.9 cents sharp an octave down).
    double min_heard_margin_db = 10.0;
    double bic_factor = 2.0;       ///< times the BIC penalty of a mode (order choice)
    double min_gain_db = 1.0;      ///< the modes leave this much less residual in the band
    double early_s = 0.1;          ///< ... and no more over this first stretch than the partial
    int esprit_dimension = 64;     ///< rows of ESPRIT's data matrix (modes/esprit.hpp)
    double late_from_s = 0.3;
    double late_block_s = 0.05;
    double late_range_db = 40.0;
    double late_tolerance_db = 0.5;
    double min_span_s = 0.4;       ///< notes shorter than this are left alone
    /// No mode may start louder than the partial's loudest sample by this much (dB): louder ones
    /// cancel each other, an ill-conditioned fit.
    double max_rise_db = 6.0;
};

struct mode_split_summary {
    int split = 0;        ///< partials replaced by modes
    int modes_added = 0;  ///< partials appended (modes beyond the first of each split)
};

/// Replaces the strongest partials of p by close modes where they fit the recording better (rules
/// above), in place. note[0] is p's onset; p's noise bands are ignored. Needs a sample rate the
/// renderer accepts (otherwise nothing changes).
mode_split_summary split_into_modes(patch& p, std::span<const float> note, double sample_rate_hz,
                                    const mode_split_params& params);

}  // namespace wane

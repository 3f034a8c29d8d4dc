// Onset-anchored refinement of a fitted patch in the time domain: the STFT fits know each
// partial's frequency and later decay but blur its first tens of milliseconds over a window. Here
// the first span_s of the waveform decides the start of every partial (level and phase at t = 0,
// early decay) by least squares on the samples (modes/damped_mode.hpp), and modes the tracker
// missed (short-lived ones, found in subbands by ESPRIT, modes/subband_modes.hpp) join the patch
// as partials of their own.
#pragma once

#include <span>

#include "core/patch.hpp"
#include "analysis/early_companion.hpp"
#include "analysis/onset_attack.hpp"
#include "modes/subband_modes.hpp"

namespace wane {

struct onset_refine_params {
    /// Waveform after the onset on which the complex amplitudes are fitted, seconds.
    double fit_span_s = 0.15;
    /// Subband search for modes (span, band layout, ESPRIT). The layout does not follow the
    /// pitch, so a pitch given as a hint (--f0) finds the same modes.
    subband_mode_params subbands{};
    /// A subband mode this close to a fitted partial (Hz, or this many cents) is that partial ...
    /// and a new mode keeps this many resolution cells (1 / fit span) from every partial.
    double new_mode_clearance_cells = 2.0;
    double same_mode_hz = 3.0;
    double same_mode_cents = 15.0;
    /// A partial closer than one resolution cell (1 / fit span) to another is left as rendered,
    /// unless the other, at another frequency, stays this far under it over the span (it is then
    /// fitted; the weak one is left). Reasoned choice: a twin 30 dB down (amplitude ratio 0.032)
    /// beats the pair by 20 log10(1.032 / 0.968) = 0.55 dB peak to peak at most. Two partials at
    /// one frequency are one sinusoid in two stages (its level is their sum): both stay.
    double twin_ignore_db = 30.0;
    /// A new mode is kept when its energy over the fit span is within this many dB of the
    /// strongest mode's, and its T60 is at least min_new_t60_s.
    double new_mode_range_db = 45.0;
    double min_new_t60_s = 0.006;
    /// ... and is a resonance, not a burst of noise: quality factor pi f / decay (f over its
    /// bandwidth) at least this ...
    double min_new_q = 10.0;
    /// ... and explains at least this share of what its band (main lobe, half-width
    /// max(2 cells, d / pi)) holds once every other fitted mode is taken off: its own energy in the
    /// band over the energy there of the fit's residual plus itself (analysis/new_mode_rule.hpp).
    /// Measured against what is left, the test does not depend on a neighbour's phase (against the
    /// recording's band energy, a resonance 16 Hz under a partial was kept at two of four phases of
    /// that partial: tests/unit/test_onset_modes.cpp). A mode that explains more of its band's
    /// leftover than everything else there, with a margin; each of the many poles that fit a burst
    /// of noise carries a small part. Chosen on the 17 real notes (tools/bench_fidelity): at 0.5
    /// the nylon guitar's copy kept one more mode and lost the gain its peak had needed, its
    /// log-spectral distance 0.10 dB over the old rule's; at 0.55 and 0.6 no note loses more than
    /// 0.08 dB and the gains stay (steel guitar +2.2 dB first-100 ms SNR, dulcimer +1.7).
    double new_mode_share = 0.55;
    /// ... and is stable: found again on stable_span_fraction of the subband span, within
    /// stable_freq_cells resolution cells and stable_decay_rel of its decay.
    double stable_span_fraction = 0.6;
    double stable_freq_cells = 0.5;
    double stable_decay_rel = 0.3;
    /// ... and at most max_new_t60_s: poles that fit the attack noise ring on as tones. A mode
    /// that lives longer, up to max_lasting_t60_s, is kept only where the recording shows it
    /// lasting (lasting_modes, analysis/new_mode_rule.hpp): the STFT tracker does not keep every
    /// such mode (a steel guitar's 110 Hz body mode, T60 0.27 s, 20 dB under its strongest
    /// partial, in tools/more_notes.py's steel_b4).
    double max_new_t60_s = 0.2;
    double max_lasting_t60_s = 0.5;
    /// ... lasting: its amplitude measured on the span after the fit span, counted from t = 0
    /// along its own decay, is no more than this many dB under the one measured on the fit span.
    double lasting_tolerance_db = 3.0;
    /// A partial whose fitted onset level is this far below its STFT peak rises slowly: it keeps
    /// its fitted attack ramp and only its level (by at most this much) and phase are fitted.
    double slow_rise_db = 6.0;
    /// ... unless its fitted attack is longer than this: the STFT ramp is then no guide to the
    /// first fit span, and the start is fitted as a damped exponential (with its own attack time).
    double max_shaped_attack_s = 0.3;
    /// The early line is joined to the STFT envelope at their crossing, searched up to this time;
    /// without one, a bridge of bridge_s joins them after the fit span.
    double join_search_s = 0.3;
    double bridge_s = 0.05;
    /// Each strong partial may rise over an attack time chosen on the waveform instead of starting
    /// at once (analysis/onset_attack.hpp).
    bool search_attacks = true;
    onset_attack_params attacks{};
    /// New modes beside a partial may stand in for its rise (a struck bar's partial that rises
    /// over 1 ms, with two poles either side in the fit that starts it at once). So the first
    /// pass's attacks are searched a second way, as if the fit had no new modes, for this many of
    /// the strongest partials and over the attack ramps only; each way then runs its passes, and
    /// the second way is taken when its residual is lower by attacks.min_gain_share of the span's
    /// energy (the margin the attack search asks of a change). 0: one way only.
    std::size_t alone_attack_partials = 8;
    /// The start of the modes at sample resolution: the note given may begin a little before its
    /// modes do (the tracker's onset is a 2 ms block walked back over the rise; a mallet's contact
    /// or a pick's noise comes first). The start is moved later, by at most max_start_shift_s, to
    /// where the modes fitted from there leave the least squared error over the samples from the
    /// given onset on (the samples before the start count as error: the patch is silent there).
    double max_start_shift_s = 0.005;
    /// ... each of the strongest partials (attacks.max_rising_partials) searched with a companion
    /// of this decay (1/s; 46: T60 0.15 s, the fit span), so a partial may swell from the start.
    double start_rise_decay_per_s = 46.0;
    /// An exponential start more than 12 dB over the partial's STFT peak is taken as the fit's, not
    /// the recording's (the partial keeps its STFT shape), unless the span's Hann-windowed
    /// projection at the partial reads it within this many dB and the next span goes on with it
    /// (falling no faster than a mode of T60 loud_lasting_t60_s; onset_refine.cpp: heard_at_fitted_level).
    double loud_heard_db = 3.0;
    double loud_lasting_t60_s = 1.0;
    /// An envelope with an instant onset that agrees with the early line within this is kept.
    double agree_db = 1.0;
    /// After the passes, a partial whose STFT envelope rises may take that shape when it fits the
    /// span better beside an early companion (analysis/early_companion.hpp: choose_stft_starts).
    /// On by default, with analysis_params::early_companions (which gives the figures).
    bool stft_starts = true;
    early_companion_params companions{};
};

struct onset_refine_summary {
    int new_modes = 0;            ///< partials added from the subband search
    int refined = 0;              ///< partials given an instant onset and a fitted start
    double explained_db = 0.0;    ///< -10 log10(residual / signal energy) over the fit span
    std::size_t start_shift_n = 0;  ///< the modes start this many samples after note[0]
};

/// Refines p's partials on note (note[0] at p's onset), in place, and adds the new modes. When the
/// modes start later than note[0] (summary.start_shift_n), the patch's phases count from that
/// start: the caller moves p's onset there.
onset_refine_summary refine_onset(patch& p, std::span<const float> note, double sample_rate_hz,
                                  const onset_refine_params& params);

}  // namespace wane

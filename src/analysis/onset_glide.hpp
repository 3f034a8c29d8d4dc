// Each strong partial's early pitch glide (core/glide.hpp), fitted on the waveform after the
// onset refinement: a hard strike or pluck starts a partial sharp (or flat) of its long-term
// frequency, and with one frequency per partial the onset's least-squares fit turns such a partial
// down, its phase drifting against the recording's.
//
// Per partial k, strongest start first (at most max_partials, within range_db of the strongest;
// past them up to max_short_lived_partials short-lived ones in that range):
//   y = x - (the copy's other partials), over the first span_s after the onset (the copy rendered
//       by synthesis/render from the patch as it stands, the partials already given a glide with it);
//   psi(t) = 2 pi f t + g(t), g the glide's phase G - R(t) for (c0, tau) (core/glide.hpp);
//   S_a(c0, tau) = sum_n y[n] a[n] e^(-j psi(n)): the model y ~ Re(C a e^(j psi)) has C = 2 S_a / D,
//       D = sum a^2 (the image at -2f averages out over a span of many periods), and explains
//       E_a = 2 |S_a|^2 / D of y's energy. S is summed over blocks of block_s:
//       sum_b e^(-j g_b) (Z_b - j g'_b Z1_b), Z_b = sum of z[n] = y a e^(-j 2 pi f n / fs) over the
//       block, Z1_b = sum of (n - n_b) z[n] (g to first order about the block's centre n_b: its
//       second-order term, g'' (block / 2)^2 / 2 with |g''| <= 2 pi f |x0| / tau, x0 = c0 ln2 / 1200,
//       is 0.009 rad at most for a 50-cent glide of tau = 5 ms at 2 kHz and 1 ms blocks).
//   (c0, tau) maximize E with a = 1 (the phase of the heterodyned signal, every instant of the
//   span weighted alike: the patch's early decay, fitted without the glide, would weight the
//   first milliseconds where a glide cannot be told from a phase), on a grid (cents_step over
//   +-max_abs_cents, glide_s_steps time constants geometrically from min_fit_glide_s to
//   max_fit_glide_s, on at that ratio to max_short_lived_glide_s for a short-lived partial), then
//   on a finer grid around the best (refine_share: not for a coarse best far short of a kept one). A best on the offsets' outer edge takes the grid on by a
//   ring of offsets up to twice as large (offset_rings); one still on the edge is a partial off
//   its frequency over the whole span, not a glide, and is left out. A best at the longest time
//   constant is kept: a glide slower than the span is the frequency the partial plays early, off
//   where it is heard, and the heard frequency is kept as below.
// The glide is kept when it explains clearly more than no glide: the extra energy E(c0, tau) - E(0)
// is at least 10^(min_gain_db / 10) - 1 (26% for 1 dB) of the smaller of E(0) (what the partial
// explains without it) and what stays unexplained near f (the energy of the block sums Z_b with
// a = 1, a boxcar filter about f of first null 1 / block_s, less E(c0, tau)): two more parameters
// must buy a stated share, the penalty of this criterion, not any gain. The partial then takes the
// glide, the phase arg(C) and its start level scaled by |C| with a = its envelope (the first decay
// segment keeps its level at its end, so only the early decay changes; at most
// max_level_change_db). A lasting partial's glide that has not settled by the heard span
// (pitch/root.hpp) moves where the copy is heard: its settled frequency is moved by the miss and
// the glide fitted again (heard_passes, analysis/glide_heard.hpp), so the copy's peak over the
// span stays at the frequency the analysis measured there and the pitch a transposed copy is
// tuned by stays put. Past the early_checked_after strongest, a glide that raises the copy's
// residual over the first early_s is dropped. The whole set is kept only if the copy's residual over the span falls;
// otherwise the patch is left as it was.
#pragma once

#include <cstddef>
#include <span>

#include "core/patch.hpp"

namespace wane {

struct onset_glide_params {
    double span_s = 0.15;              ///< the onset refinement's fit span
    /// Partials whose start is within range_db of the strongest, at most the max_partials
    /// strongest starts tried. Measured against 30 dB and 8 (bench_fidelity, with the early check
    /// below): banjo_g3's first-100 ms SNR 4.31 -> 5.67 dB, no note's LSD up by 0.01 dB; 24 starts
    /// gained piano_d2 and marimba_c3 0.2 dB more but put dulcimer_g4's LSD, the worst, 0.003 dB up.
    double range_db = 40.0;
    std::size_t max_partials = 16;
    /// ... and past them, up to this many short-lived partials (see max_short_lived_glide_s) in
    /// the same range: xylophone_fs3's modes of T60 0.1-0.2 s, 20-26 dB under its strongest.
    std::size_t max_short_lived_partials = 16;
    /// ... each of which must explain this share of the span's energy more with its glide than
    /// without: two parameters on a weak partial must buy a stated part of the copy's residual
    /// (at 10 dB first-100 ms SNR, 0.005 lowers the residual by 5%, 0.2 dB).
    double min_short_lived_extra = 0.005;
    double min_freq_hz = 60.0;         ///< below it a 150 ms span holds under 9 periods
    double max_abs_cents = 96.0;       ///< the coarse grid's range (measured strike glides: up to ~50)
    double cents_step = 4.0;
    /// Rings of larger offsets searched where the best lies on the range's edge: ring r holds
    /// max_abs_cents 2^(r-1) to 2^r. pizzicato_c2's second harmonic plays 133-136 Hz over its
    /// first 0.25 s and is heard at 128.47 Hz (over 0.1-1.1 s): best at 96 cents without them,
    /// 142 cents (tau 0.17 s) with one, first-100 ms SNR 6.08 -> 9.4 dB; a second ring gained no
    /// note more and put timpani_d2's LSD 0.09 dB up (bench_fidelity).
    std::size_t offset_rings = 1;
    double min_fit_glide_s = 0.005;
    double max_fit_glide_s = 0.25;
    int glide_s_steps = 10;
    /// A short-lived partial (its envelope short_lived_drop_db under its start by short_lived_at_s)
    /// may take time constants past max_fit_glide_s, the grid going on at the same ratio up to
    /// max_short_lived_glide_s: for such a partial a slow glide is the frequency it plays while it
    /// sounds, which its long-term frequency (measured over 0.1-1.1 s, when it has died away)
    /// misses; a longer-lived partial's grid stops at max_fit_glide_s (the fine grid reaching half
    /// an octave past it): allowed 1 s, banjo_g3's first-100 ms SNR fell 5.67 -> 4.17 dB
    /// (bench_fidelity, with the heard frequency kept). xylophone_fs3's modes of T60 0.1-0.2 s took
    /// glides of 20-85 cents with time constants of 0.37-0.72 s.
    double max_short_lived_glide_s = 1.0;
    double short_lived_at_s = 0.3;
    double short_lived_drop_db = 40.0;
    double fine_cents_step = 0.5;      ///< the fine grid: +-cents_step around the best
    int fine_glide_s_steps_per_octave = 12;  ///< ... and half an octave either side in time constant
    /// The fine grid summed on the coarse grid's blocks (twice block_s: half the blocks, the glide's
    /// second-order term up to 4 times the fine blocks'), its best summed again on the fine ones;
    /// the bound's floor there merged_floor_share lower (the one value tried). Trades the fine
    /// grid's precision where the second-order term matters for half its work: measured against
    /// the fine blocks (bench_fidelity), 20 of the 40 held-out and 5 of the 17 shared patches
    /// change, medians of LSD and SNR100 within 0.005 dB, the largest SNR100 drop 0.13 dB
    /// (xylophone_fs3), rise 0.50 (koto_c5); fit_onset_glides on bass_ds2 142.7 -> 96.7 M
    /// instructions.
    bool fine_on_merged_blocks = true;
    double merged_floor_share = 0.01;
    double min_gain_db = 1.0;          ///< the share the glide must explain more (see above)
    /// A coarse best short of this share of the way from no glide (E(0)) to the least E kept is not
    /// refined (nor one short of half of min_short_lived_extra): the fine grid moves a best by
    /// under a coarse step. Measured on the 17 shared, the demo and the 40 held-out notes (58; main
    /// 26d29e6, -j 1): of the 1812 glides that passed every check of the fit, the lowest coarse
    /// best lay 0.735 of the way (banjo_g3's 2475.7 Hz, 80.5 cents) at 1 dB asked, 0.387 at the
    /// slow pass's 0.02 dB (rhodes_g4's 1766.4 Hz, -2.5 cents; the next 0.517).
    double refine_share = 0.5;
    /// A glide under one coarse step is the fine search walking the coarse best (never 0) back
    /// towards no glide: too weak a case (on guitar_nylon_d3 a -3-cent glide cost 0.03 dB of SNR).
    double min_cents = 4.0;
    /// The start level follows the glide fit's |C| by at most this much either way (a factor of
    /// 2 in power; measured on timpani_d2, banjo_g3, harpsichord_d2 against 6 dB and against
    /// raising only, in the closing measurements of this stage).
    double max_level_change_db = 3.0;
    double block_s = 0.001;
    /// A glide that has not settled by the heard span (pitch/root.hpp) moves where the copy is
    /// heard: the settled frequency is then moved by the miss and the glide fitted again, up to
    /// heard_passes times, until the copy's peak over the span (analysis/glide_heard.hpp) lies
    /// within heard_tolerance_cents of freq_hz; otherwise the partial keeps no glide. Short-lived
    /// partials are left out (their long-term frequency was measured when they had died away).
    /// Measured without it, a kept 130-cent glide of pizzicato_c2's 128.47 Hz put the copy's
    /// peak there 7.8 cents sharp (tests/cli/test_pitch_real_notes.sh: tolerance 1 cent). The
    /// last pass keeps its glide and only moves the frequency (the refits move the glide by grid
    /// steps, and the miss with them: banjo_g3's 5253 Hz swung +-0.24 Hz).
    int heard_passes = 4;
    double heard_tolerance_cents = 0.05;
    /// Past the early_checked_after strongest starts tried, a glide is dropped where it raises the
    /// copy's residual over the first early_s by more than the share max_early_rise: the fit
    /// weights the span's every instant alike and may buy the later part with the attack
    /// (measured: banjo_g3's 11th strongest, 5063 Hz, raised it by 4.5%, its glide turning it
    /// from cancelling its 5049 Hz neighbour to adding to it, and put the copy's share of energy
    /// above 4 kHz in the first 10 ms 5.1 dB over the recording's, eval_texture). The strongest
    /// keep glides that raise it (banjo_g3's 534 Hz by 10%, xylophone_fs3's 1103 Hz by 16%):
    /// checking every partial lost 0.6 dB of xylophone_fs3's first-100 ms SNR and banjo_g3's gain.
    double early_s = 0.01;
    double max_early_rise = 0.0;
    std::size_t early_checked_after = 8;
    /// Leave short-lived partials out (analysis_params::slow_glides: a pass for lasting partials).
    bool lasting_only = false;
};

struct onset_glide_summary {
    int glides = 0;                    ///< partials given a glide
    double residual_before_db = 0.0;   ///< the copy's residual over the span re the recording's energy
    double residual_after_db = 0.0;
};

/// The envelope's start level (its peak) times `scale`, clamped to +-max_db: a first decay segment
/// with an end keeps its level there (its T60 follows), so the later envelope stays. Also
/// analysis/early_refit's.
void scale_envelope_start(envelope& env, double scale, double max_db);

/// Fits glides to p's strong partials on note (note[0] at the patch's onset, where its phases
/// count from), in place, as described above. Mono: a stereo mix's channels arrive apart.
onset_glide_summary fit_onset_glides(patch& p, std::span<const float> note, double sample_rate_hz,
                                     const onset_glide_params& params);

}  // namespace wane

// The whole analysis: a mono recording -> a patch. Owned by the Analysis II work.
#pragma once

#include <functional>
#include <span>
#include <string>
#include <string_view>

#include "analysis/cut_tail.hpp"
#include "analysis/early_companion.hpp"
#include "analysis/early_refit.hpp"
#include "analysis/early_twin.hpp"
#include "analysis/noise_model.hpp"
#include "analysis/recording_end.hpp"
#include "analysis/beating_pairs.hpp"
#include "analysis/mode_split.hpp"
#include "analysis/heard_peaks.hpp"
#include "analysis/onset_refine.hpp"
#include "analysis/peak_match.hpp"
#include "analysis/start_ramp.hpp"
#include "core/analysis_error.hpp"
#include "core/patch.hpp"
#include "fitting/envelope_fit.hpp"
#include "tracking/tracker.hpp"
#include "analysis/onset_glide.hpp"

namespace wane {

struct analysis_params {
    tracking_params tracking;
    int max_segments = 3;
    double start_s = 0.0;     ///< analyze from here (seconds into the file)
    double end_s = 0.0;       ///< 0 = to the end
    std::string source_file;  ///< recorded in [source].file
    std::string note_name;    ///< [note].name
    bool noise_model = true;  ///< fit [[noise]] bands to the residual (analysis/noise_model.hpp)
    noise_model_params noise{};
    recording_end_params recording_end{};
    cut_tail_params cut_tail{};
    /// Refit every partial's start on the waveform and add the short-lived modes
    /// (analysis/onset_refine.hpp).
    bool refine_onset = true;
    /// Split partials that beat into two (analysis/beating_pairs.hpp); off by default: on real
    /// notes a pitch glide can still pass for a pair (analyze --split-pairs turns it on).
    bool split_pairs = false;
    beating_pair_params pairs{};
    /// Set note.gain_db so the copy peaks with the recording (peak_matching_gain_db).
    bool match_peak = true;
    onset_refine_params onset{};
    /// Fit each strong partial's early pitch glide on the waveform after the onset refinement
    /// (analysis/onset_glide.hpp); analyze_stereo_note turns it off for the mix.
    bool fit_glides = true;
    onset_glide_params glides{};
    /// Then a second pass of the same fit for slow, small glides of lasting partials that the
    /// first pass (its 150 ms span and its 1 dB) leaves out: a plucked string that starts some
    /// cents sharp and settles over a few tenths of a second (held-out acoustic_bass_f2: its
    /// strongest partials run 10-15 cents sharp of the copy over 0.05-0.3 s, then at its pitch
    /// 35-50 degrees ahead, and the evaluation's alignment over 0.5 s then places the copy 26
    /// samples early), over 0.3 s, down to 30 Hz, offsets to 24 cents in 2-cent steps, time
    /// constants 0.02-0.35 s (the first pass has the faster ones), 2 ms blocks (a slow glide's
    /// phase is nearly straight over one), kept for a 0.1 dB gain (2.3%); the glide and phase
    /// only, the start level kept (with the first pass's 3 dB, 1 ms blocks from 5 ms: the 40
    /// notes' median 11.95, the 17's 13.80, dulcimer_g4's LSD 9.36). Measured (tools/bench_fidelity against main
    /// 24ad1b1): 40 held-out notes' first-100 ms SNR median 11.65 -> 11.94 dB (the 20 it was
    /// chosen on 12.11 -> 13.19, the other 20 10.57 -> 10.96), LSD median 5.31 -> 5.31; the 17
    /// real notes 13.80 -> 13.80, LSD 4.42 -> 4.42 (timpani_d2 6.17 -> 7.65, banjo_g3 7.21 ->
    /// 8.33, piano_as4 13.98 -> 13.86; dulcimer_g4's LSD 9.10 -> 9.35). 1 ms blocks from 5 ms:
    /// the same medians at 8% more analysis instructions; these cost 3.4% (callgrind, whole
    /// analyze -j 1: synthetic note 903.9M -> 934.2M, demo note 1092.4M -> 1130.0M).
    /// Widened since (measured against main 917f313): glides down to 1 cent over 0.4 s, kept for a 0.02 dB
    /// gain (0.46%): most strings and many struck bars play 1-3 cents sharp over their first
    /// 0.1-0.4 s and settle (held-out harp_cs4's 277 Hz, piano_as3's, picked_bass_e2's and
    /// finger_bass_a1's strongest partials end 10-30 degrees ahead of a copy held at the heard
    /// frequency), under the 4-cent floor and the 0.1 dB gain; the evaluation's alignment over
    /// 0.5 s then places the copy 1-3 samples early, which costs 1-5 dB of first-100 ms SNR.
    /// tools/bench_fidelity: the 20 held-out notes it was chosen on 12.83 -> 14.04 dB (median),
    /// the other 20 10.79 -> 13.50 (all 40 12.08 -> 13.63, LSD 5.20 -> 5.21; glocken_c8's LSD
    /// 7.30 -> 8.25, its noise model's attack band moving), the 17 real notes 13.89 -> 13.89
    /// (LSD 4.52 -> 4.45). The 4-cent floor alone gave 13.62 on the first 20; over 0.5 s, 13.88
    /// with acoustic_bass_f2 and pizz_e4 0.4 dB down. Cost: the glide stage's instructions +28%
    /// (synthetic note; +21% demo note), the whole analysis +4.5% (+3.0%) (callgrind, -j 1).
    bool fit_slow_glides = true;
    onset_glide_params slow_glides{.span_s = 0.4, .min_freq_hz = 30.0, .max_abs_cents = 24.0, .cents_step = 2.0, .min_fit_glide_s = 0.02,
                                   .max_fit_glide_s = 0.35, .min_gain_db = 0.02, .refine_share = 0.25, .min_cents = 1.0, .max_level_change_db = 0.0,
                                   .block_s = 0.002, .lasting_only = true};
    /// Then replace the strongest partials without a glide by a few close modes each where those
    /// fit the recording better (analysis/mode_split.hpp).
    bool split_modes = true;
    mode_split_params modes{};
    /// Then give partials whose first 150 ms one shape cannot follow an early companion at their
    /// frequency (analysis/early_companion.hpp); analyze_stereo_note turns it off for the mix.
    /// On by default (mono), with onset.stft_starts. Measured on the 17 real notes
    /// (tools/bench_fidelity, against main 2486ce4 without them): first-100 ms SNR median 13.59 ->
    /// 13.79 dB and no note down (piano_d2 7.81 -> 9.83, xylophone_fs3 11.12 -> 12.15, dulcimer_g4
    /// 6.04 -> 7.17, timpani_d2 5.29 -> 6.11, banjo_g3 6.47 -> 7.23, harpsichord_d2 5.91 -> 6.52);
    /// log-spectral distance median 4.38 -> 4.41, none up by more than 0.09 dB (glockenspiel_g6);
    /// tools/eval_texture.py's floor medians -0.98 / -0.21 -> -0.81 / -0.35 dB. With
    /// companions.min_partial_share 0 the SNR gains were larger, but a clean note of three damped
    /// modes got companions (test_pitch).
    bool early_companions = true;
    early_companion_params companions{};
    /// Then give the strongest partials a steady twin a few cents off where the first 150 ms beat
    /// and the later note agrees (analysis/early_twin.hpp); with the companions (off for a stereo
    /// mix: analyze_stereo_note turns those off). Measured with tools/bench_fidelity against main
    /// ddfdaf4: the 40 held-out notes' first-100 ms SNR median 13.63 -> 14.20 dB (the 20 at odd
    /// places, tuned on: 14.04 -> 14.46; the other 20: 13.50 -> 14.00), none down by more than
    /// 0.04 dB (timpani_3), banjo_4 6.73 -> 10.41, nylon_a3 13.58 -> 17.24, musicbox_gs3 15.02 ->
    /// 19.01; log-spectral distance median 5.21 -> 5.21, none up by more than 0.04 dB; the 17
    /// shared notes: SNR median 13.89 -> 13.89, none down by more than 0.03 dB (banjo_g3 8.30 ->
    /// 11.28), log-spectral distance median 4.45 -> 4.45. Analysis instructions +4.8% on the
    /// synthetic note, +4.5% on the demo note (callgrind, -j 1; neither takes a twin).
    bool early_twins = true;
    early_twin_params twins{};
    /// Then refit the strong partials' phases and start levels on what the finished copy leaves
    /// of the first 150 ms (analysis/early_refit.hpp); analyze_stereo_note turns it off for the mix.
    /// Measured on the 17 real notes (tools/bench_fidelity, against main 2da8a4a): first-100 ms SNR
    /// mean 13.34 -> 13.48 dB, median 13.79 -> 13.80, none down by more than 0.02 dB (banjo_g3),
    /// xylophone_fs3 12.15 -> 12.53, pizzicato_c2 9.74 -> 10.20, marimba_c3 15.05 -> 15.37,
    /// dulcimer_g4 7.17 -> 7.42; log-spectral distance up by at most 0.05 dB (pizzicato_c2,
    /// timpani_d2). Phase only (max_level_change_db 0, check_s 0.5): mean 13.38, median 13.74.
    /// It costs 6% more analysis instructions on the synthetic note, 9% on the demo note
    /// (callgrind, whole analyze -j 1 against main 2da8a4a: 908.6M -> 964.4M, 1081.3M -> 1180.6M),
    /// most of it in rendering each partial three times over 0.15-0.3 s.
    bool refit_early = true;
    early_refit_params early_refit{};
    /// Give the partials that start at once a sub-millisecond rise where their jump from silence
    /// is steeper than the recording's start (analysis/start_ramp.hpp).
    bool soften_start = true;
    start_ramp_params start_ramp{};
    /// Partial frequencies from the recording's own long spectrum, and partials for its strong
    /// peaks no track found (analysis/heard_peaks.hpp); analyze --no-long-spectrum turns it off.
    bool long_spectrum = true;
    heard_peak_params heard_peaks{};
    /// The stages that fit the waveform itself over the whole note (the added peaks' narrow bands,
    /// the pair split, the mode split) read at most this much of it after the onset (s). Their
    /// buffers grow with what they read (a note-long render and residual, one FFT of all of it:
    /// 550 MB on a 10-minute 48 kHz note, tools/bench_memory), and 30 s holds the decays they fit
    /// many times over (a T60 of 60 s falls 30 dB in it); past it a part's last segment runs on, and
    /// the tracks' envelope fits still cover the whole note. Reasoned choice, not measured on notes
    /// that long (the real notes are 0.8-4 s).
    double max_waveform_fit_s = 30.0;
};

struct analysis_summary {
    int partials = 0;
    int segments = 0;          ///< total decay segments over all partials
    double fit_error_db = 0.0; ///< RMS error of the envelope fits over all fitted frames, dB
    int tracks = 0;            ///< tracks the tracker returned
    int unfitted = 0;          ///< tracks dropped: fewer than two frames clear of the floor
    recording_end end{};       ///< how the recording ends (analysis/recording_end.hpp)
    int continued_past_cut = 0;  ///< partials and bands whose last segment was made to fall (cut_tail.hpp)
    int faded_past_cut = 0;      ///< partials and bands given the fade's T60 past the cut (cut_tail.hpp)
    int pairs_split = 0;       ///< partials split into beating pairs
    int moved_to_heard_peaks = 0;  ///< partials moved to the recording's long-spectrum peak
    int merged_companions = 0;     ///< late companions merged into their stronger neighbour (heard_peaks)
    int added_heard_peaks = 0;     ///< partials added for long-spectrum peaks no track accounts for
    int new_modes = 0;             ///< partials added by the onset refinement (short-lived modes)
    /// Energy of the first fit span explained by the partials, dB (onset refinement).
    double onset_explained_db = 0.0;
    int glides = 0;               ///< partials given an early pitch glide (analysis/onset_glide.hpp)
    int modes_split = 0;           ///< partials replaced by close modes (analysis/mode_split.hpp)
    int modes_added = 0;           ///< ... and the partials that added
    double start_ramp_s = 0.0;     ///< the instant partials' rise (analysis/start_ramp.hpp), 0: none
    /// Audio left out after start_s + max_length_s (a patch holds at most max_length_s), s.
    double unanalysed_s = 0.0;
};

struct analysis_result {
    patch value;
    tracking_result tracking;
    analysis_summary summary;
};

/// Largest number of decay segments per partial the analysis fits (--max-segments): an analysis
/// setting, well inside the format's limit patch_rules::max_decay_segments.
inline constexpr int max_fit_decay_segments = max_fit_segments;

/// Called by analyze_note as each of its stages ends, with the stage's name, in order: "tracking",
/// "envelope fits", "long spectrum" (the heard-span spectrum, the move to its peaks, the late
/// companions' merge), "root and added peaks", "pair split", "onset refinement", "start rise", "noise model",
/// "recording end", "peak match". A stage that does not run (its switch off) is still reported.
/// The analysis reads no clock: a benchmark times the stages between calls (tools/bench_analyze).
using stage_observer = std::function<void(std::string_view stage)>;

/// A DC offset (the recording's mean) is removed before the analysis when it stands within this of
/// the peak |sample|, dB: the tracker takes the mean off its frames, but the waveform fits, the
/// noise model and the recording-end test saw it as a held level (with +0.05 of full scale added,
/// 8 of the 17 real notes read as holding their level, 3 cut ones among them: tools/make_variants,
/// dc). The 17 real notes' own means lie 54 dB or more under their peaks (sox stat): left as they are.
inline constexpr double dc_offset_range_db = 50.0;

/// Whether samples' mean stands within range_db of their peak |sample| (mean accumulated in double).
bool has_dc_offset(std::span<const float> samples, double range_db = dc_offset_range_db);

/// Subtracts samples' mean from every sample, in place; returns the mean removed.
double remove_mean(std::span<float> samples);

/// Throws analysis_error with a user-facing reason when the sound cannot be analyzed.
analysis_result analyze_note(std::span<const float> samples, double sample_rate_hz,
                             const analysis_params& params, const stage_observer& stage_done = {});

}  // namespace wane

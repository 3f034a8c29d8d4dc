// Sound-design edits on a patch: pure functions from wane::patch to wane::patch.
//
// Every edit is also reachable through one struct, transform_params, applied in a fixed order by
// apply_transforms() (the order is documented there). The CLI's `wane edit`, `wane render` and
// `wane keymap` all go through apply_transforms, so an edit means the same thing everywhere.
//
// Decisions (stated once here, referred to by the functions below):
// - Octaves above f0: a harmonic partial n sits log2(n) octaves above f0; a partial off the
//   series (harmonic = 0) sits log2(freq_hz / ref_hz) octaves above the reference, where ref_hz
//   is note.f0_hz or, when the patch has no pitch centre (f0 = 0), the lowest partial's frequency.
//   Noise bands use their centre frequency (low_hz + high_hz) / 2 the same way.
// - Decay stretching: scaling an envelope's decay by X multiplies every t60_s by X and moves every
//   until_s so that its distance from the end of the attack is X times as long:
//   until' = attack_s + X (until - attack_s). Each segment therefore keeps its share of the decay
//   (the same dB drop over X times the time) and the level curve after the attack is the old one
//   stretched by X: level'(attack + X tau) = level(attack + tau). The attack is unchanged.
//   T60 = inf (hold) stays inf; a negative T60 (rise) is stretched the same way.
// - Transposition keeps B: scaling every frequency by r keeps f_n / (n f0) and so B.
// - A partial's pitch glide (glide_cents, glide_s; core/glide.hpp) is in cents, so a transposition
//   (or a detune, or set_b) keeps it as it is; the decay edits leave it alone, like the attack
//   (it is part of the strike, not of the decay).
#pragma once

#include <cstddef>
#include <cstdint>
#include <optional>
#include <stdexcept>
#include <string>

#include "core/patch.hpp"
#include "core/pitch_names.hpp"

namespace wane {

/// A transform that cannot be applied to this patch (e.g. to-note on an unpitched patch, or a
/// transposition that leaves nothing below Nyquist). `param` names the transform_params field
/// (e.g. "transpose_semitones") so the CLI can name its option.
struct transform_error : std::runtime_error {
    transform_error(std::string param_name, const std::string& message)
        : std::runtime_error(message), param(std::move(param_name)) {}
    std::string param;
};

enum class harmonic_parity { all, odd_only, even_only };

/// Rule of thumb (common practice, no source): when a note is transposed by a frequency ratio r,
/// its T60s scale as r^(-p); p = 1 means an octave up rings half as long.
inline constexpr double rule_of_thumb_decay_exponent = 1.0;

struct variation_params {
    std::uint64_t seed = 1;
    double detune_cents = 0.0;     ///< each partial detuned by a uniform draw in [-x, +x] cents
    double level_jitter_db = 0.0;  ///< each partial's peak moved by a uniform draw in [-x, +x] dB
    double decay_jitter = 0.0;     ///< each partial's decay stretched by 1 + u x, u uniform in [-1, 1); x in [0, 1)
    bool random_phase = false;     ///< each partial's phase drawn uniformly in [0, 2 pi)
    friend bool operator==(const variation_params&, const variation_params&) = default;
};

/// True when the variation changes anything.
bool varies(const variation_params& v);

struct transform_params {
    // Pitch.
    double transpose_semitones = 0.0;  ///< ignored when to_midi is set
    std::optional<int> to_midi{};      ///< transpose so the root lands on this MIDI note (equal temperament)
    double a4_hz = default_a4_hz;      ///< tuning reference for to_midi
    bool decay_follows_pitch = false;  ///< apply the rule of thumb T60 *= r^(-p) when transposing
    double decay_pitch_exponent = rule_of_thumb_decay_exponent;  ///< p
    // Decay.
    double decay_scale = 1.0;  ///< X: all T60s times X (see "Decay stretching" above)
    double decay_tilt = 0.0;   ///< k: T60 *= 2^(k * octaves above f0)
    // Level.
    double brightness_db_per_oct = 0.0;  ///< peak_db += tilt * octaves above f0
    double gain_db = 0.0;                ///< added to note.gain_db
    // Selection.
    harmonic_parity parity = harmonic_parity::all;  ///< partials off the series are kept
    std::optional<double> max_freq_hz{};            ///< drop partials above; clip noise bands
    std::optional<std::size_t> keep_strongest{};    ///< keep the N partials with the highest peak_db
    // Inharmonicity.
    std::optional<double> set_b{};  ///< new B (>= 0); moves harmonic partials to n f0 sqrt(1 + B n^2)
    double scale_b = 1.0;         ///< B times this (>= 0); ignored when set_b is given
    // Variation.
    variation_params variation{};
    // Stereo (transform/stereo_edit.hpp), applied last: width scales the channel differences,
    // pan places the whole note (and makes a mono patch stereo).
    double width = 1.0;
    std::optional<double> pan{};
};

/// Frequency ratio the pitch part of `params` applies to `p` (1 when there is none). Throws
/// transform_error when to_midi is set and the patch has no f0.
double transpose_ratio(const patch& p, const transform_params& params);

// ---- The single edits (each a pure function; apply_transforms chains them). ----

/// Multiplies every partial frequency, f0 and every noise band edge by ratio (> 0).
patch transpose_by_ratio(const patch& p, double ratio);
/// Transposes by a number of equal-tempered semitones: ratio 2^(semitones / 12).
patch transpose_semitones(const patch& p, double semitones);
/// Transposes so that the root (root_hz: the stated root, else f0) becomes midi_to_hz(midi, a4_hz);
/// every frequency is scaled by one ratio, so each partial keeps its offset from the series. Throws
/// transform_error when the patch has no root.
patch transpose_to_note(const patch& p, int midi, double a4_hz = default_a4_hz);
/// Puts a stated root exactly on `midi` (tuning 0 cents when its A4 is a4_hz).
void place_root_on(note_info& n, int midi, double a4_hz);

/// Stretches one envelope's decay by factor (> 0), as described under "Decay stretching".
envelope stretch_decay(const envelope& env, double factor);
/// All partials' and noise bands' decays stretched by factor.
patch scale_decay(const patch& p, double factor);
/// Each partial's decay stretched by 2^(k * octaves above f0); noise bands by their centre.
patch tilt_decay(const patch& p, double k);

/// Octaves of a partial above the patch's reference (see "Octaves above f0").
double octaves_above_reference(const patch& p, const partial& q);

/// peak_db += db_per_octave * octaves above f0, for partials and noise bands.
patch tilt_brightness(const patch& p, double db_per_octave);

/// Keeps harmonic partials of the chosen parity (and all partials with harmonic = 0).
patch select_parity(const patch& p, harmonic_parity parity);
/// Drops partials with freq_hz >= ceiling_hz; clips noise bands to the ceiling, dropping bands
/// that start at or above it.
patch drop_above(const patch& p, double ceiling_hz);
/// Keeps the n partials with the highest peak_db (ties: the lower frequency wins).
patch keep_strongest(const patch& p, std::size_t n);

/// Sets B (>= 0) and moves each harmonic partial n to n f0 sqrt(1 + B n^2). Throws
/// transform_error when the patch has harmonic partials but no f0.
patch set_inharmonicity(const patch& p, double b);

/// Seeded random detune, level and decay jitter, phase randomization of every partial.
patch vary(const patch& p, const variation_params& v);

/// Applies everything in `params` in this order:
///   1. harmonic parity selection;
///   2. inharmonicity (set_b, else scale_b), on the original f0;
///   3. transposition (to_midi, else transpose_semitones), and with decay_follows_pitch the rule
///      of thumb decay factor r^(-p);
///   4. decay scale, then decay tilt;
///   5. brightness tilt and gain;
///   6. frequency ceiling, then the Nyquist limit sample_rate_hz / 2 (sample_rate_hz = 0: none);
///   7. keep the N strongest (after the level edits and the limits, before variation, so every
///      variant keeps the same partials);
///   8. variation; partials a detune pushed to or past the Nyquist limit are dropped;
///   9. canonical order.
/// Throws transform_error when an edit does not fit the patch: a transposition or ceiling that
/// leaves no partial, to_midi or set_b on an unpitched patch, or a level edit that pushes a peak
/// above the format's max_peak_db.
/// What apply_transforms removed, for messages (so nothing is dropped silently).
struct transform_report {
    std::size_t dropped_by_parity = 0;
    std::size_t dropped_above_ceiling = 0;  ///< by max_freq_hz
    std::size_t dropped_above_nyquist = 0;  ///< at or above sample_rate_hz / 2 (also after detune)
    std::size_t dropped_weakest = 0;        ///< by keep_strongest
};
patch apply_transforms(const patch& p, const transform_params& params, double sample_rate_hz,
                       transform_report* report = nullptr);

}  // namespace wane

// The patch model (format "wane-patch", versions 1 to 4) as plain data. The TOML mapping lives in
// src/io/patch_toml.*; the core only sees these structs. Times are seconds from the note's onset,
// levels dBFS, frequencies Hz.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "core/envelope.hpp"
#include "core/pitch_names.hpp"

namespace wane {

/// Newest version the reader accepts, and the one a patch with a pitch glide is written as
/// (version 4 added the partial keys glide_cents and glide_s). A stereo patch without glides is
/// written as version 3 (which added [note] channels and the per-part stereo keys), a mono one as
/// version 2, so wane versions that predate those keys read such patches unchanged.
inline constexpr int patch_format_version = 4;
inline constexpr int glide_patch_format_version = 4;
inline constexpr int stereo_patch_format_version = 3;
inline constexpr int mono_patch_format_version = 2;
/// Oldest version the reader accepts (version 1 has no root keys; its root is f0_hz).
inline constexpr int oldest_patch_format_version = 1;
inline constexpr const char* patch_format_name = "wane-patch";

/// How a note's root was found (pitch/root.hpp); written as the [note] key root_found_by.
enum class root_method {
    unstated,         ///< no root keys (version 1 or hand-made): the root is f0_hz
    harmonic_series,  ///< fundamental of the fitted stiff-string series
    lowest_mode,      ///< lowest strong mode (tuned bars, timpani, tines)
    strike_note,      ///< strike note of a bell (virtual pitch of nominal, twelfth, upper octave)
    f0_hint,          ///< the series started from the user's --f0
    by_hand,          ///< set by `wane edit --root` or written by hand
    unpitched,        ///< no pitch centre
};
std::string_view root_method_name(root_method m);
std::optional<root_method> parse_root_method(std::string_view name);

/// The root note: the MIDI note a sampler maps the sound to and its tuning in cents from that
/// note's equal-tempered frequency with the given A4. Meaningful unless method is unstated or
/// unpitched.
struct note_root {
    int midi = a4_midi;
    double tuning_cents = 0.0;
    double a4_hz = default_a4_hz;
    root_method method = root_method::unstated;
    friend bool operator==(const note_root&, const note_root&) = default;
};

struct note_info {
    std::string name;
    double f0_hz = 0.0;            ///< 0 when the sound has no pitch centre
    double length_s = 4.0;         ///< how long a render lasts
    double inharmonicity_b = 0.0;  ///< B in f_n = n f0 sqrt(1 + B n^2); 0 if not fitted
    double gain_db = 0.0;
    int channels = 1;  ///< 1 (mono) or 2 (stereo: left, right); key channels, version 3
    note_root root{};
    friend bool operator==(const note_info&, const note_info&) = default;
};

/// Settings the analysis used, recorded so a patch says how it was made (table [source.analysis]).
struct analysis_settings {
    std::string window;       ///< window name, e.g. "blackman-harris"
    int fft_size = 0;         ///< FFT length in samples (after zero padding)
    double window_s = 0.0;    ///< window length in seconds
    double hop_s = 0.0;       ///< hop in seconds
    friend bool operator==(const analysis_settings&, const analysis_settings&) = default;
};

struct source_info {
    std::string file;
    double sample_rate_hz = 0.0;
    double onset_s = 0.0;  ///< where the note starts in the source
    /// Seconds from the onset at which the recording stops while the note still sounds (key cut_s);
    /// empty when the note decays, or holds, to the recording's end.
    std::optional<double> cut_s;
    std::optional<analysis_settings> analysis;
    friend bool operator==(const source_info&, const source_info&) = default;
};

/// Where a partial or noise band sits between the two channels of a stereo patch (all zero in a
/// mono patch). Channel levels follow the constant-power sine pan law normalized to 0 dB at
/// centre (core/stereo.hpp): pan -1 is left only (+3.01 dB there), 0 both channels at peak_db,
/// +1 right only. The right channel lags the left by delay_us (negative: leads); for a partial
/// that is a phase difference, the left channel at phase_rad + pi f delay, the right at
/// phase_rad - pi f delay. spread_db_per_s gives the channels their own decays: the right minus
/// left level difference grows by that many dB per second after the attack (each channel's
/// segments fall spread/2 dB per second slower or faster than the shared envelope).
struct stereo_place {
    double pan = 0.0;
    double delay_us = 0.0;
    double spread_db_per_s = 0.0;
    friend bool operator==(const stereo_place&, const stereo_place&) = default;
};

struct partial {
    double freq_hz = 0.0;
    int harmonic = 0;  ///< 0 = not on the harmonic series
    double phase_rad = 0.0;  ///< phase at t = 0 of cos(2 pi f t + phase)
    envelope env;
    stereo_place place;  ///< keys pan, delay_us, spread_db_per_s (stereo patches only)
    /// Early pitch glide (core/glide.hpp): the partial starts glide_cents off freq_hz and the
    /// offset decays with time constant glide_s. 0 and 0: no glide (keys absent).
    double glide_cents = 0.0;
    double glide_s = 0.0;
    friend bool operator==(const partial&, const partial&) = default;
};

/// A band of shaped noise (deterministic-plus-stochastic model); same envelope form as a partial.
struct noise_band {
    double low_hz = 0.0;
    double high_hz = 0.0;
    envelope env;  ///< peak level is the band's RMS level in dBFS
    /// Stereo patches only: pan and spread_db_per_s as for a partial (delay_us stays 0: a band is
    /// noise, it has no phase to delay), and how alike the two channels' noise is: coherence 1
    /// plays the same noise in both, 0 independent noise in each, c between a sqrt(c) : sqrt(1-c)
    /// amplitude mix of shared and own noise (so the channels correlate at c).
    stereo_place place;
    double coherence = 1.0;
    friend bool operator==(const noise_band&, const noise_band&) = default;
};

struct patch {
    int version = patch_format_version;
    note_info note;
    source_info source;
    std::vector<partial> partials;  ///< canonical order: ascending freq_hz
    std::vector<noise_band> noise;  ///< canonical order: ascending low_hz
    friend bool operator==(const patch&, const patch&) = default;
};

/// Whether p has two channels ([note] channels = 2).
inline bool is_stereo(const patch& p) { return p.note.channels == 2; }
/// Whether a partial of p glides (glide_cents != 0).
bool has_glide(const patch& p);
/// The version a patch is written as: 4 with a glide, else 3 for stereo, 2 for mono.
inline int written_format_version(const patch& p) {
    if (has_glide(p)) return glide_patch_format_version;
    return is_stereo(p) ? stereo_patch_format_version : mono_patch_format_version;
}

/// The root's frequency: midi_to_hz(midi + cents / 100, a4_hz); note.f0_hz when the root is
/// unstated; 0 when unpitched.
double root_hz(const note_info& n);
/// Moves a stated, pitched root to freq_hz (> 0): the nearest MIDI note under the root's A4 and
/// the rest in cents; keeps the method and A4. Does nothing to an unstated or unpitched root.
void set_root_hz(note_info& n, double freq_hz);

/// Sorts partials by frequency and noise bands by low edge (the canonical order).
void canonicalize(patch& p);

/// Limits the format enforces (validated in the reader, asserted by the core); the rest of the
/// format's limits are in core/patch_rules.hpp. Analysis defaults (tracking_params::max_partials,
/// max_fit_decay_segments) are settings, named apart.
inline constexpr std::size_t max_partials = 4096;
inline constexpr double max_length_s = 600.0;
inline constexpr double max_peak_db = 24.0;

}  // namespace wane

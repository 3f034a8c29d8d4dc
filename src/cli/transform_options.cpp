#include "cli/transform_options.hpp"

#include <cmath>
#include <map>
#include <sstream>

#include "cli/common.hpp"
#include "core/pitch_names.hpp"

namespace wane::cli {

namespace {

constexpr const char* group_name = "Sound design";

/// The largest transposition accepted: +-10 octaves spans every audible pitch from any other.
constexpr double max_transpose_semitones = 120.0;
/// Bounds of the decay and level edits: far beyond any musical use, they keep every T60 and level
/// finite (2^(8 * 12 octaves) is still a finite double).
constexpr double max_decay_scale = 100.0;
constexpr double max_abs_decay_tilt = 8.0;
constexpr double max_abs_decay_pitch_exponent = 4.0;
constexpr double max_abs_brightness_db_per_oct = 48.0;
/// Upper bounds of the variation and B options (our choice, no source): a detune of a semitone
/// and a level jitter of 24 dB are far past any round-robin use; B = 1 is the patch format's
/// own bound (patches/README.md), and --scale-b 1000 takes a guitar's B of about 1e-5 to 1e-2.
constexpr double max_detune_cents = 100.0;
constexpr double max_level_jitter_db = 24.0;
/// Widest stereo width: four times the recorded differences (our choice; more is rarely useful).
constexpr double max_width = 4.0;
constexpr double max_set_b = 1.0;
constexpr double max_scale_b = 1000.0;
/// Tuning references accepted by --a4-hz (a generous band around concert pitch).
constexpr double min_a4_hz = 300.0;
constexpr double max_a4_hz = 600.0;

const std::map<std::string, std::string>& option_names() {
    static const std::map<std::string, std::string> names{
        {"transpose_semitones", "--transpose"},
        {"to_midi", "--to-note"},
        {"a4_hz", "--a4-hz"},
        {"decay_follows_pitch", "--decay-follows-pitch"},
        {"decay_pitch_exponent", "--decay-pitch-exponent"},
        {"decay_scale", "--decay-scale"},
        {"decay_tilt", "--decay-tilt"},
        {"brightness_db_per_oct", "--brightness-db-oct"},
        {"parity", "--odd-only/--even-only"},
        {"max_freq_hz", "--max-freq-hz"},
        {"keep_strongest", "--keep-strongest"},
        {"set_b", "--set-b"},
        {"scale_b", "--scale-b"},
        {"variation.level_jitter_db", "--level-jitter-db"},
        {"sample_rate_hz", "--rate"},
    };
    return names;
}

void require_finite(double v, const char* option) {
    if (!std::isfinite(v)) throw usage_error(std::string(option) + ": must be a finite number");
}

}  // namespace

void add_transform_options(CLI::App* sub, transform_cli& o) {
    sub->add_option("--transpose", o.transpose_semitones, "Transpose by this many semitones (may be fractional)")
        ->group(group_name);
    sub->add_option("--to-note", o.to_note, "Transpose so f0 lands on this note (C4, F#3, Bb2 or a MIDI number)")
        ->group(group_name);
    sub->add_option("--a4-hz", o.a4_hz, "Tuning of A4 for --to-note (and edit --root), Hz")
        ->capture_default_str()->group(group_name);
    sub->add_flag("--decay-follows-pitch", o.decay_follows_pitch,
                  "When transposing by a ratio r, scale every T60 by r^(-p) (rule of thumb: higher notes "
                  "decay faster; p from --decay-pitch-exponent)")
        ->group(group_name);
    sub->add_option("--decay-pitch-exponent", o.decay_pitch_exponent,
                    "p of --decay-follows-pitch (1: an octave up rings half as long; a rule of thumb)")
        ->capture_default_str()->group(group_name);
    sub->add_option("--decay-scale", o.decay_scale,
                    "Multiply every T60 by X; segment ends move so each segment keeps its share; attack unchanged")
        ->capture_default_str()->group(group_name);
    sub->add_option("--decay-tilt", o.decay_tilt,
                    "Scale each partial's T60 by 2^(K * octaves above f0): K < 0 makes highs die sooner")
        ->capture_default_str()->group(group_name);
    sub->add_option("--brightness-db-oct", o.brightness_db_per_oct,
                    "Level tilt in dB per octave above f0 (negative = darker)")
        ->capture_default_str()->group(group_name);
    sub->add_option("--keep-strongest", o.keep_strongest, "Keep only the N partials with the highest peak level")
        ->group(group_name);
    sub->add_flag("--odd-only", o.odd_only, "Keep only odd harmonics (partials off the series stay)")->group(group_name);
    sub->add_flag("--even-only", o.even_only, "Keep only even harmonics (partials off the series stay)")->group(group_name);
    sub->add_option("--max-freq-hz", o.max_freq_hz, "Drop partials at or above this frequency")->group(group_name);
    sub->add_option("--set-b", o.set_b,
                    "Set the inharmonicity B and place harmonic partials exactly at n f0 sqrt(1 + B n^2)")
        ->group(group_name);
    sub->add_option("--scale-b", o.scale_b, "Multiply B by this factor and place harmonic partials exactly at n f0 sqrt(1 + B n^2)")
        ->group(group_name);
    sub->add_option("--seed", o.seed, "Seed of the random variation (same seed, same variant)")
        ->capture_default_str()->group(group_name);
    sub->add_option("--detune-cents", o.detune_cents, "Detune each partial by a random amount within +-C cents")
        ->capture_default_str()->group(group_name);
    sub->add_option("--level-jitter-db", o.level_jitter_db, "Move each partial's level by a random amount within +-D dB")
        ->capture_default_str()->group(group_name);
    sub->add_option("--decay-jitter", o.decay_jitter,
                    "Scale each partial's decay by a random factor within 1 +- F (F in [0, 1))")
        ->capture_default_str()->group(group_name);
    sub->add_flag("--random-phase", o.random_phase, "Give each partial a random start phase")->group(group_name);
    sub->add_option("--width", o.width,
                    "Stereo: scale the differences between the channels (0 alike, 1 as is, 2 twice; 0 to 4)")
        ->capture_default_str()->group(group_name);
    sub->add_option("--pan", o.pan,
                    "Place the whole note from -1 (left) to +1 (right); makes a mono patch stereo")
        ->group(group_name);
}

namespace {

/// The variation options (--seed, --detune-cents, --level-jitter-db, --decay-jitter,
/// --random-phase), checked.
variation_params to_variation(const transform_cli& o) {
    variation_params v;
    v.seed = o.seed;
    require_finite(o.detune_cents, "--detune-cents");
    if (o.detune_cents < 0.0 || o.detune_cents > max_detune_cents) {
        throw usage_error("--detune-cents: must be from 0 to 100 cents");
    }
    v.detune_cents = o.detune_cents;
    require_finite(o.level_jitter_db, "--level-jitter-db");
    if (o.level_jitter_db < 0.0 || o.level_jitter_db > max_level_jitter_db) {
        throw usage_error("--level-jitter-db: must be from 0 to 24 dB");
    }
    v.level_jitter_db = o.level_jitter_db;
    require_finite(o.decay_jitter, "--decay-jitter");
    if (o.decay_jitter < 0.0 || o.decay_jitter >= 1.0) throw usage_error("--decay-jitter: must be in [0, 1)");
    v.decay_jitter = o.decay_jitter;
    v.random_phase = o.random_phase;
    return v;
}

}  // namespace

transform_params to_params(const transform_cli& o) {
    transform_params t;
    if (o.transpose_semitones && !o.to_note.empty()) throw usage_error("--transpose and --to-note exclude each other");
    if (o.transpose_semitones) {
        require_finite(*o.transpose_semitones, "--transpose");
        if (std::abs(*o.transpose_semitones) > max_transpose_semitones) {
            std::ostringstream msg;
            msg << "--transpose: " << *o.transpose_semitones << " is beyond +-" << max_transpose_semitones << " semitones";
            throw usage_error(msg.str());
        }
        t.transpose_semitones = *o.transpose_semitones;
    }
    if (!o.to_note.empty()) {
        const auto midi = parse_note(o.to_note);
        if (!midi) {
            throw usage_error("--to-note: unknown note name '" + o.to_note +
                              "' (expected a name like C4, F#3, Bb2 or a MIDI number 0..127)");
        }
        t.to_midi = *midi;
    }
    require_finite(o.a4_hz, "--a4-hz");
    if (o.a4_hz < min_a4_hz || o.a4_hz > max_a4_hz) throw usage_error("--a4-hz: must be between 300 and 600 Hz");
    t.a4_hz = o.a4_hz;
    t.decay_follows_pitch = o.decay_follows_pitch;
    require_finite(o.decay_pitch_exponent, "--decay-pitch-exponent");
    if (std::abs(o.decay_pitch_exponent) > max_abs_decay_pitch_exponent) {
        throw usage_error("--decay-pitch-exponent: must be within +-4");
    }
    t.decay_pitch_exponent = o.decay_pitch_exponent;
    require_finite(o.decay_scale, "--decay-scale");
    if (!(o.decay_scale > 0.0) || o.decay_scale > max_decay_scale) {
        throw usage_error("--decay-scale: must be greater than 0 and at most 100");
    }
    t.decay_scale = o.decay_scale;
    require_finite(o.decay_tilt, "--decay-tilt");
    if (std::abs(o.decay_tilt) > max_abs_decay_tilt) throw usage_error("--decay-tilt: must be within +-8");
    t.decay_tilt = o.decay_tilt;
    require_finite(o.brightness_db_per_oct, "--brightness-db-oct");
    if (std::abs(o.brightness_db_per_oct) > max_abs_brightness_db_per_oct) {
        throw usage_error("--brightness-db-oct: must be within +-48 dB per octave");
    }
    t.brightness_db_per_oct = o.brightness_db_per_oct;
    if (o.keep_strongest) {
        if (*o.keep_strongest < 1) throw usage_error("--keep-strongest: must be at least 1");
        t.keep_strongest = static_cast<std::size_t>(*o.keep_strongest);
    }
    if (o.odd_only && o.even_only) throw usage_error("--odd-only and --even-only exclude each other");
    t.parity = o.odd_only ? harmonic_parity::odd_only : o.even_only ? harmonic_parity::even_only : harmonic_parity::all;
    if (o.max_freq_hz) {
        require_finite(*o.max_freq_hz, "--max-freq-hz");
        if (!(*o.max_freq_hz > 0.0)) throw usage_error("--max-freq-hz: must be greater than 0");
        t.max_freq_hz = *o.max_freq_hz;
    }
    if (o.set_b && o.scale_b) throw usage_error("--set-b and --scale-b exclude each other");
    if (o.set_b) {
        require_finite(*o.set_b, "--set-b");
        if (*o.set_b < 0.0 || *o.set_b > max_set_b) throw usage_error("--set-b: B must be from 0 to 1");
        t.set_b = *o.set_b;
    }
    if (o.scale_b) {
        require_finite(*o.scale_b, "--scale-b");
        if (*o.scale_b < 0.0 || *o.scale_b > max_scale_b) throw usage_error("--scale-b: must be from 0 to 1000");
        t.scale_b = *o.scale_b;
    }
    t.variation = to_variation(o);
    require_finite(o.width, "--width");
    if (o.width < 0.0 || o.width > max_width) throw usage_error("--width: must be from 0 to 4");
    t.width = o.width;
    if (o.pan) {
        require_finite(*o.pan, "--pan");
        if (*o.pan < -1.0 || *o.pan > 1.0) throw usage_error("--pan: must be from -1 (left) to +1 (right)");
        t.pan = *o.pan;
    }
    return t;
}

std::string transform_option_name(const std::string& param) {
    const auto& names = option_names();
    const auto it = names.find(param);
    return it == names.end() ? param : it->second;
}

patch apply_transforms_checked(const patch& p, const transform_params& params, double sample_rate_hz,
                               const std::string& patch_name) {
    transform_report report;
    patch out;
    try {
        out = apply_transforms(p, params, sample_rate_hz, &report);
    } catch (const transform_error& e) {
        throw std::runtime_error(patch_name + ": " + transform_option_name(e.param) + ": " + e.what());
    }
    const auto tell = [&](std::size_t n, const std::string& why) {
        if (n > 0) say(patch_name + ": " + std::to_string(n) + " partial(s) " + why + " left out");
    };
    tell(report.dropped_by_parity, "off the chosen parity (--odd-only/--even-only)");
    if (params.max_freq_hz) tell(report.dropped_above_ceiling, "at or above --max-freq-hz " + std::to_string(static_cast<long>(*params.max_freq_hz)) + " Hz");
    tell(report.dropped_above_nyquist, "at or above the Nyquist frequency " + std::to_string(static_cast<long>(0.5 * sample_rate_hz)) + " Hz (--rate)");
    tell(report.dropped_weakest, "weaker than the strongest N (--keep-strongest)");
    return out;
}

}  // namespace wane::cli

#include "transform/transform.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <numeric>
#include <sstream>

#include "core/harmonics.hpp"
#include "core/rng.hpp"
#include "transform/stereo_edit.hpp"

namespace wane {

namespace {

constexpr double semitones_per_octave = 12.0;
constexpr double cents_per_octave = 1200.0;

// Streams of the counter-based random draws in vary(): one per quantity, so each draw depends
// only on (seed, quantity, partial index).
enum variation_stream : std::uint64_t { stream_detune = 0, stream_level = 1, stream_decay = 2, stream_phase = 3 };

std::string format_hz(double freq_hz) {
    std::ostringstream s;
    s.precision(6);
    s << freq_hz << " Hz";
    return s.str();
}

/// Reference frequency of "octaves above f0": f0, else the lowest partial, else 0 (none).
double reference_hz(const patch& p) {
    if (p.note.f0_hz > 0.0) return p.note.f0_hz;
    double lowest = 0.0;
    for (const partial& q : p.partials) {
        if (q.freq_hz > 0.0 && (lowest == 0.0 || q.freq_hz < lowest)) lowest = q.freq_hz;
    }
    return lowest;
}

/// Octaves of freq_hz above ref_hz; 0 when there is no reference.
double octaves_above(double freq_hz, double ref_hz) {
    if (ref_hz <= 0.0 || freq_hz <= 0.0) return 0.0;
    return std::log2(freq_hz / ref_hz);
}

double band_centre_hz(const noise_band& b) { return 0.5 * (b.low_hz + b.high_hz); }

}  // namespace

bool varies(const variation_params& v) {
    return v.detune_cents != 0.0 || v.level_jitter_db != 0.0 || v.decay_jitter != 0.0 || v.random_phase;
}

// ---------------------------------------------------------------- pitch

patch transpose_by_ratio(const patch& p, double ratio) {
    assert(ratio > 0.0 && std::isfinite(ratio));
    patch out = p;
    out.note.f0_hz *= ratio;
    if (const double root = root_hz(p.note); root > 0.0) set_root_hz(out.note, root * ratio);
    for (partial& q : out.partials) q.freq_hz *= ratio;
    for (noise_band& b : out.noise) {
        b.low_hz *= ratio;
        b.high_hz *= ratio;
    }
    return out;
}

patch transpose_semitones(const patch& p, double semitones) {
    return transpose_by_ratio(p, std::exp2(semitones / semitones_per_octave));
}

patch transpose_to_note(const patch& p, int midi, double a4_hz) {
    transform_params params{.to_midi = midi, .a4_hz = a4_hz};
    patch out = transpose_by_ratio(p, transpose_ratio(p, params));
    place_root_on(out.note, midi, a4_hz);
    return out;
}

void place_root_on(note_info& n, int midi, double a4_hz) {
    if (n.root.method == root_method::unstated || n.root.method == root_method::unpitched) return;
    if (n.root.a4_hz == a4_hz) {
        n.root.midi = midi;  // exactly on the note: no rounding left in the cents
        n.root.tuning_cents = 0.0;
    } else {
        set_root_hz(n, midi_to_hz(midi, a4_hz));
    }
}

double transpose_ratio(const patch& p, const transform_params& params) {
    if (params.to_midi) {
        const double root = root_hz(p.note);
        if (!(root > 0.0)) {
            throw transform_error("to_midi", "the patch has no pitch centre (no root note and note.f0_hz = 0), so it "
                                             "cannot be moved to a note; use a transposition in semitones");
        }
        // Equal temperament, f = a4_hz 2^((midi - 69) / 12) (ISO 16 for a4_hz = 440): core/pitch_names.
        // The root lands on the note exactly; every partial keeps its own offset from the series.
        return midi_to_hz(*params.to_midi, params.a4_hz) / root;
    }
    return std::exp2(params.transpose_semitones / semitones_per_octave);
}

// ---------------------------------------------------------------- decay

envelope stretch_decay(const envelope& env, double factor) {
    assert(factor > 0.0 && std::isfinite(factor));
    envelope out = env;
    for (decay_segment& seg : out.decay) {
        seg.t60_s *= factor;  // inf stays inf, negative (rising) stays negative
        if (seg.until_s) seg.until_s = env.attack_s + factor * (*seg.until_s - env.attack_s);
    }
    return out;
}

patch scale_decay(const patch& p, double factor) {
    patch out = p;
    for (partial& q : out.partials) q.env = stretch_decay(q.env, factor);
    for (noise_band& b : out.noise) b.env = stretch_decay(b.env, factor);
    return out;
}

double octaves_above_reference(const patch& p, const partial& q) {
    if (q.harmonic > 0 && p.note.f0_hz > 0.0) return std::log2(static_cast<double>(q.harmonic));
    return octaves_above(q.freq_hz, reference_hz(p));
}

patch tilt_decay(const patch& p, double k) {
    patch out = p;
    const double ref_hz = reference_hz(p);
    // T60 *= 2^(k * octaves above f0).
    for (partial& q : out.partials) q.env = stretch_decay(q.env, std::exp2(k * octaves_above_reference(p, q)));
    for (noise_band& b : out.noise) b.env = stretch_decay(b.env, std::exp2(k * octaves_above(band_centre_hz(b), ref_hz)));
    return out;
}

// ---------------------------------------------------------------- level

patch tilt_brightness(const patch& p, double db_per_octave) {
    patch out = p;
    const double ref_hz = reference_hz(p);
    for (partial& q : out.partials) q.env.peak.db += db_per_octave * octaves_above_reference(p, q);
    for (noise_band& b : out.noise) b.env.peak.db += db_per_octave * octaves_above(band_centre_hz(b), ref_hz);
    return out;
}

// ---------------------------------------------------------------- selection

patch select_parity(const patch& p, harmonic_parity parity) {
    if (parity == harmonic_parity::all) return p;
    patch out = p;
    const int keep_remainder = parity == harmonic_parity::odd_only ? 1 : 0;
    std::erase_if(out.partials, [&](const partial& q) { return q.harmonic > 0 && q.harmonic % 2 != keep_remainder; });
    return out;
}

patch drop_above(const patch& p, double ceiling_hz) {
    patch out = p;
    std::erase_if(out.partials, [&](const partial& q) { return q.freq_hz >= ceiling_hz; });
    std::erase_if(out.noise, [&](const noise_band& b) { return b.low_hz >= ceiling_hz; });
    for (noise_band& b : out.noise) b.high_hz = std::min(b.high_hz, ceiling_hz);
    return out;
}

patch keep_strongest(const patch& p, std::size_t n) {
    if (p.partials.size() <= n) return p;
    std::vector<std::size_t> order(p.partials.size());
    std::iota(order.begin(), order.end(), std::size_t{0});
    std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) {
        const partial& qa = p.partials[a];
        const partial& qb = p.partials[b];
        if (qa.env.peak.db != qb.env.peak.db) return qa.env.peak.db > qb.env.peak.db;
        return qa.freq_hz < qb.freq_hz;
    });
    order.resize(n);
    std::sort(order.begin(), order.end());  // keep the original (canonical) order
    patch out = p;
    out.partials.clear();
    for (std::size_t i : order) out.partials.push_back(p.partials[i]);
    return out;
}

// ---------------------------------------------------------------- inharmonicity

patch set_inharmonicity(const patch& p, double b) {
    assert(b >= 0.0 && std::isfinite(b));
    const bool any_harmonic = std::any_of(p.partials.begin(), p.partials.end(),
                                          [](const partial& q) { return q.harmonic > 0; });
    if (any_harmonic && !(p.note.f0_hz > 0.0)) {
        throw transform_error("set_b", "the patch has no pitch centre (note.f0_hz = 0), so its harmonic "
                                       "partials cannot be placed by n f0 sqrt(1 + B n^2)");
    }
    patch out = p;
    out.note.inharmonicity_b = b;
    for (partial& q : out.partials) {
        if (q.harmonic <= 0) continue;
        q.freq_hz = stiff_partial_hz(p.note.f0_hz, b, q.harmonic);  // f_n = n f0 sqrt(1 + B n^2)
    }
    canonicalize(out);
    return out;
}

// ---------------------------------------------------------------- variation

patch vary(const patch& p, const variation_params& v) {
    assert(v.detune_cents >= 0.0 && v.level_jitter_db >= 0.0);
    assert(v.decay_jitter >= 0.0 && v.decay_jitter < 1.0);
    patch out = p;
    for (std::size_t i = 0; i < out.partials.size(); ++i) {
        partial& q = out.partials[i];
        if (v.detune_cents != 0.0) {
            const double cents = v.detune_cents * hashed_signed(v.seed, stream_detune, i);
            q.freq_hz *= std::exp2(cents / cents_per_octave);
        }
        if (v.level_jitter_db != 0.0) q.env.peak.db += v.level_jitter_db * hashed_signed(v.seed, stream_level, i);
        if (v.decay_jitter != 0.0) {
            q.env = stretch_decay(q.env, 1.0 + v.decay_jitter * hashed_signed(v.seed, stream_decay, i));
        }
        if (v.random_phase) q.phase_rad = two_pi * hashed_unit(v.seed, stream_phase, i);
    }
    canonicalize(out);
    return out;
}

// ---------------------------------------------------------------- all together

namespace {

void check_peaks(const patch& p, const char* param, const char* what) {
    for (const partial& q : p.partials) {
        if (q.env.peak.db > max_peak_db) {
            std::ostringstream s;
            s.precision(4);
            s << what << " raises the partial at " << format_hz(q.freq_hz) << " to " << q.env.peak.db
              << " dB, above the patch format's limit of +" << max_peak_db << " dB";
            throw transform_error(param, s.str());
        }
    }
}

}  // namespace

namespace {

/// Steps 1-3 of apply_transforms: parity, inharmonicity, transposition (and the decay that
/// follows it). Returns the transposition ratio.
double apply_pitch_steps(patch& out, const transform_params& params, bool had_partials, transform_report& counts) {
    // 1. Parity.
    const std::size_t before = out.partials.size();
    out = select_parity(out, params.parity);
    counts.dropped_by_parity = before - out.partials.size();
    if (had_partials && out.partials.empty()) {
        throw transform_error("parity", std::string("no partial is left after keeping only the ") +
                                            (params.parity == harmonic_parity::odd_only ? "odd" : "even") + " harmonics");
    }

    // 2. Inharmonicity.
    if (params.set_b) {
        out = set_inharmonicity(out, *params.set_b);
    } else if (params.scale_b != 1.0) {
        try {
            out = set_inharmonicity(out, out.note.inharmonicity_b * params.scale_b);
        } catch (const transform_error& e) {
            throw transform_error("scale_b", e.what());
        }
    }

    // 3. Transposition, and the rule-of-thumb decay that follows it.
    const double ratio = transpose_ratio(out, params);
    if (ratio != 1.0) out = transpose_by_ratio(out, ratio);
    if (params.to_midi) place_root_on(out.note, *params.to_midi, params.a4_hz);
    if (params.decay_follows_pitch && ratio != 1.0) {
        // Rule of thumb (no source): T60 scales as (f_new / f_old)^(-p).
        out = scale_decay(out, std::pow(ratio, -params.decay_pitch_exponent));
    }
    return ratio;
}

/// Step 6 of apply_transforms: the frequency ceiling, then the Nyquist limit of sample_rate_hz
/// (0: none). ratio names the transposition in the message when nothing is left.
void drop_out_of_band(patch& out, const transform_params& params, double sample_rate_hz, double ratio,
                      bool had_partials, transform_report& counts) {
    std::size_t before = 0;
    if (params.max_freq_hz) {
        before = out.partials.size();
        out = drop_above(out, *params.max_freq_hz);
        counts.dropped_above_ceiling = before - out.partials.size();
        if (had_partials && out.partials.empty()) {
            throw transform_error("max_freq_hz", "no partial is left below the ceiling of " +
                                                     format_hz(*params.max_freq_hz));
        }
    }
    const double nyquist_hz = 0.5 * sample_rate_hz;
    if (sample_rate_hz > 0.0) {
        before = out.partials.size();
        out = drop_above(out, nyquist_hz);
        counts.dropped_above_nyquist = before - out.partials.size();
        if (had_partials && out.partials.empty()) {
            std::ostringstream s;
            s.precision(6);
            s << "no partial is left below the Nyquist limit of " << format_hz(nyquist_hz) << " (sample rate "
              << format_hz(sample_rate_hz) << ")";
            if (ratio == 1.0) throw transform_error("sample_rate_hz", s.str());
            s << " after transposing by a factor of " << ratio;
            throw transform_error(params.to_midi ? "to_midi" : "transpose_semitones", s.str());
        }
    }
}

}  // namespace

patch apply_transforms(const patch& p, const transform_params& params, double sample_rate_hz,
                       transform_report* report) {
    assert(params.decay_scale > 0.0 && params.a4_hz > 0.0 && sample_rate_hz >= 0.0);
    const bool had_partials = !p.partials.empty();
    transform_report counts;
    std::size_t before = 0;

    // 1-3. Parity, inharmonicity, transposition.
    patch out = p;
    const double ratio = apply_pitch_steps(out, params, had_partials, counts);

    // 4. Decay.
    if (params.decay_scale != 1.0) out = scale_decay(out, params.decay_scale);
    if (params.decay_tilt != 0.0) out = tilt_decay(out, params.decay_tilt);

    // 5. Level.
    if (params.brightness_db_per_oct != 0.0) {
        out = tilt_brightness(out, params.brightness_db_per_oct);
        check_peaks(out, "brightness_db_per_oct", "the brightness tilt");
    }
    out.note.gain_db += params.gain_db;

    // 6. Frequency ceiling, then Nyquist.
    drop_out_of_band(out, params, sample_rate_hz, ratio, had_partials, counts);

    // 7. Keep the strongest.
    if (params.keep_strongest) {
        assert(*params.keep_strongest >= 1);
        before = out.partials.size();
        out = keep_strongest(out, *params.keep_strongest);
        counts.dropped_weakest = before - out.partials.size();
    }

    // 8. Variation.
    if (varies(params.variation)) {
        out = vary(out, params.variation);
        check_peaks(out, "variation.level_jitter_db", "the level jitter");
        if (sample_rate_hz > 0.0) {
            before = out.partials.size();
            out = drop_above(out, 0.5 * sample_rate_hz);
            counts.dropped_above_nyquist += before - out.partials.size();
        }
    }

    // 9. Stereo width, then the note's pan.
    if (params.width != 1.0) out = scale_width(out, params.width);
    if (params.pan) out = pan_note(out, *params.pan);

    // 10. Canonical order.
    canonicalize(out);
    if (report) *report = counts;
    return out;
}

}  // namespace wane

#include "transform/blend.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <sstream>
#include <string>
#include <tuple>
#include <vector>

#include "transform/transform.hpp"

namespace wane {

namespace {

constexpr std::size_t unpaired = static_cast<std::size_t>(-1);

double lerp(double a, double b, double mix) { return (1.0 - mix) * a + mix * b; }
double geometric_lerp(double a, double b, double mix) { return std::exp(lerp(std::log(a), std::log(b), mix)); }

/// Slope in dB/s of the envelope's level line at time_s (after its attack; before it, the first
/// piece's slope).
double slope_at(const std::vector<envelope_piece>& pieces, double time_s) {
    assert(!pieces.empty());
    for (const envelope_piece& p : pieces) {
        if (time_s < p.end_s) return p.slope_db_per_s;
    }
    return pieces.back().slope_db_per_s;
}

/// Interpolated T60 of one piece: log scale when both decay at a finite rate, else via the slope.
double blend_t60(double slope_a, double slope_b, double mix) {
    const double ta = slope_db_per_s_to_t60(slope_a);
    const double tb = slope_db_per_s_to_t60(slope_b);
    if (std::isfinite(ta) && std::isfinite(tb) && ta > 0.0 && tb > 0.0) return geometric_lerp(ta, tb, mix);
    return slope_db_per_s_to_t60(lerp(slope_a, slope_b, mix));
}

/// Level offset of a fade by an amplitude weight in (0, 1]: 20 log10(weight) dB.
double fade_db(double weight) { return to_level(amp_lin{weight}).db; }

}  // namespace

envelope blend_envelopes(const envelope& ea, const envelope& eb, double mix) {
    envelope out;
    out.attack_s = lerp(ea.attack_s, eb.attack_s, mix);
    out.peak = level_db{lerp(ea.peak.db, eb.peak.db, mix)};
    const auto pa = envelope_pieces(ea);
    const auto pb = envelope_pieces(eb);

    std::vector<double> breaks;
    for (const auto* pieces : {&pa, &pb}) {
        for (const envelope_piece& p : *pieces) {
            if (std::isfinite(p.end_s) && p.end_s > out.attack_s) breaks.push_back(p.end_s);
        }
    }
    std::sort(breaks.begin(), breaks.end());
    breaks.erase(std::unique(breaks.begin(), breaks.end()), breaks.end());

    double start_s = out.attack_s;
    for (std::size_t i = 0; i <= breaks.size(); ++i) {
        const bool last = i == breaks.size();
        const double probe_s = last ? start_s : 0.5 * (start_s + breaks[i]);
        const double t60_s = blend_t60(slope_at(pa, probe_s), slope_at(pb, probe_s), mix);
        if (!out.decay.empty() && out.decay.back().t60_s == t60_s) {
            out.decay.back().until_s = last ? std::optional<double>{} : std::optional<double>{breaks[i]};
        } else {
            out.decay.push_back({.t60_s = t60_s,
                                 .until_s = last ? std::optional<double>{} : std::optional<double>{breaks[i]}});
        }
        if (!last) start_s = breaks[i];
    }
    return out;
}

namespace {

/// Pairs the partials of a with those of b: equal harmonic numbers first (when both are pitched),
/// then the nearest frequencies within the tolerance, closest pairs first (ties: lower indices).
/// Returns, per partial of a, the index into b.partials or unpaired; b_taken marks b's paired ones.
std::vector<std::size_t> pair_partials(const patch& a, const patch& b, const blend_params& params, bool both_pitched,
                                       std::vector<bool>& b_taken) {
    std::vector<std::size_t> pair_of_a(a.partials.size(), unpaired);
    if (both_pitched) {
        for (std::size_t i = 0; i < a.partials.size(); ++i) {
            if (a.partials[i].harmonic <= 0) continue;
            for (std::size_t j = 0; j < b.partials.size(); ++j) {
                if (!b_taken[j] && b.partials[j].harmonic == a.partials[i].harmonic) {
                    pair_of_a[i] = j;
                    b_taken[j] = true;
                    break;
                }
            }
        }
    }
    // Nearest frequency within the tolerance, closest pairs first (ties: lower indices).
    std::vector<std::tuple<double, std::size_t, std::size_t>> candidates;
    for (std::size_t i = 0; i < a.partials.size(); ++i) {
        if (pair_of_a[i] != unpaired) continue;
        for (std::size_t j = 0; j < b.partials.size(); ++j) {
            if (b_taken[j]) continue;
            const double cents = std::abs(cents_between(b.partials[j].freq_hz, a.partials[i].freq_hz));
            if (cents <= params.match_tolerance_cents) candidates.emplace_back(cents, i, j);
        }
    }
    std::sort(candidates.begin(), candidates.end());
    for (const auto& [cents, i, j] : candidates) {
        if (pair_of_a[i] != unpaired || b_taken[j]) continue;
        pair_of_a[i] = j;
        b_taken[j] = true;
    }
    return pair_of_a;
}

}  // namespace

void blend_glide(const partial& a, const partial& b, double mix, partial& out) {
    out.glide_cents = lerp(a.glide_cents, b.glide_cents, mix);
    if (a.glide_cents != 0.0 && b.glide_cents != 0.0) {
        out.glide_s = geometric_lerp(a.glide_s, b.glide_s, mix);
    } else {
        out.glide_s = a.glide_cents != 0.0 ? a.glide_s : b.glide_s;
    }
    if (out.glide_cents == 0.0) out.glide_s = 0.0;
}

patch blend(const patch& a, const patch& b, const blend_params& params) {
    assert(params.mix >= 0.0 && params.mix <= 1.0 && params.match_tolerance_cents >= 0.0);
    if (a.version != b.version) {
        throw transform_error("version", "cannot blend patches of different format versions (" +
                                             std::to_string(a.version) + " and " + std::to_string(b.version) + ")");
    }
    const double mix = params.mix;
    if (mix == 0.0) return a;
    if (mix == 1.0) return b;
    const bool a_dominant = mix <= 0.5;
    const bool both_pitched = a.note.f0_hz > 0.0 && b.note.f0_hz > 0.0;

    // Pairing: pair_of_a[i] = index into b.partials or unpaired.
    std::vector<bool> b_taken(b.partials.size(), false);
    const std::vector<std::size_t> pair_of_a = pair_partials(a, b, params, both_pitched, b_taken);

    const patch& dominant = a_dominant ? a : b;
    patch out;
    out.version = a.version;
    out.source = dominant.source;
    std::ostringstream name;
    name << "blend of '" << a.note.name << "' and '" << b.note.name << "', mix " << mix;
    out.note.name = name.str();
    out.note.f0_hz = both_pitched ? geometric_lerp(a.note.f0_hz, b.note.f0_hz, mix) : dominant.note.f0_hz;
    out.note.inharmonicity_b =
        both_pitched ? lerp(a.note.inharmonicity_b, b.note.inharmonicity_b, mix) : dominant.note.inharmonicity_b;
    // The root: the dominant patch's, moved to the geometric mean of both roots when both have one.
    out.note.root = dominant.note.root;
    if (const double ra = root_hz(a.note), rb = root_hz(b.note); ra > 0.0 && rb > 0.0)
        set_root_hz(out.note, geometric_lerp(ra, rb, mix));
    out.note.length_s = lerp(a.note.length_s, b.note.length_s, mix);
    out.note.gain_db = lerp(a.note.gain_db, b.note.gain_db, mix);
    // Stereo when either is: a mono patch's parts sit at the centre (pan 0, no delay, coherent
    // noise), and a paired partial's pan, delay and spread are interpolated like its level.
    out.note.channels = std::max(a.note.channels, b.note.channels);

    const double weight_a = 1.0 - mix;
    const double weight_b = mix;
    for (std::size_t i = 0; i < a.partials.size(); ++i) {
        const partial& pa = a.partials[i];
        if (pair_of_a[i] == unpaired) {
            partial faded = pa;
            faded.env.peak.db += fade_db(weight_a);
            out.partials.push_back(faded);
            continue;
        }
        const partial& pb = b.partials[pair_of_a[i]];
        const partial& pd = a_dominant ? pa : pb;
        out.partials.push_back({.freq_hz = geometric_lerp(pa.freq_hz, pb.freq_hz, mix),
                                .harmonic = pd.harmonic,
                                .phase_rad = pd.phase_rad,
                                .env = blend_envelopes(pa.env, pb.env, mix),
                                .place = {.pan = lerp(pa.place.pan, pb.place.pan, mix),
                                          .delay_us = lerp(pa.place.delay_us, pb.place.delay_us, mix),
                                          .spread_db_per_s = lerp(pa.place.spread_db_per_s, pb.place.spread_db_per_s, mix)}});
        blend_glide(pa, pb, mix, out.partials.back());
    }
    for (std::size_t j = 0; j < b.partials.size(); ++j) {
        if (b_taken[j]) continue;
        partial faded = b.partials[j];
        faded.env.peak.db += fade_db(weight_b);
        out.partials.push_back(faded);
    }
    for (const noise_band& band : a.noise) {
        out.noise.push_back(band);
        out.noise.back().env.peak.db += fade_db(weight_a);
    }
    for (const noise_band& band : b.noise) {
        out.noise.push_back(band);
        out.noise.back().env.peak.db += fade_db(weight_b);
    }
    assert(out.partials.size() <= a.partials.size() + b.partials.size());
    canonicalize(out);
    return out;
}

}  // namespace wane

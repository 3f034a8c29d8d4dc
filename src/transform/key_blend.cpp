#include "transform/key_blend.hpp"
#include "transform/blend.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <optional>
#include <vector>

namespace wane {

namespace {

constexpr double db_per_t60 = 60.0;  // a T60 is the time of a 60 dB fall
constexpr double cents_per_octave = 1200.0;

double lerp(double x, double y, double w) { return (1.0 - w) * x + w * y; }
double log_lerp(double x, double y, double w) { return std::exp(lerp(std::log(x), std::log(y), w)); }

/// Stiff-string series factor sqrt(1 + B n^2) (Fletcher 1964; the patch format's f_n = n f0 sqrt(1 + B n^2)).
double series_factor(int n, double b) { return std::sqrt(1.0 + b * static_cast<double>(n) * n); }

double interpolate_b(double b_a, double b_b, double w) {
    return (b_a > 0.0 && b_b > 0.0) ? log_lerp(b_a, b_b, w) : lerp(b_a, b_b, w);
}

bool is_harmonic(const patch& p) {
    return std::any_of(p.partials.begin(), p.partials.end(), [](const partial& q) { return q.harmonic > 0; });
}

/// The envelope between two envelopes (see the header). Levels: peak_a/peak_b already hold the
/// patches' gains. Times after the attack are taken from each envelope's own attack end (tau), so
/// two notes with different attacks line up their decays.
envelope interpolate_envelope(const envelope& a, const envelope& b, double peak_a_db, double peak_b_db, double w) {
    envelope e;
    e.peak = level_db{lerp(peak_a_db, peak_b_db, w)};
    e.attack_s = (a.attack_s > 0.0 && b.attack_s > 0.0) ? log_lerp(a.attack_s, b.attack_s, w)
                                                         : lerp(a.attack_s, b.attack_s, w);
    const auto all_decay = [](const envelope& env) {
        return std::all_of(env.decay.begin(), env.decay.end(),
                           [](const decay_segment& s) { return s.t60_s > 0.0 && std::isfinite(s.t60_s); });
    };
    if (a.decay.size() == b.decay.size() && all_decay(a) && all_decay(b)) {
        for (std::size_t i = 0; i < a.decay.size(); ++i) {
            decay_segment s{.t60_s = interpolate_t60_s(a.decay[i].t60_s, b.decay[i].t60_s, w), .until_s = {}};
            if (a.decay[i].until_s && b.decay[i].until_s) {
                const double tau = lerp(std::max(0.0, *a.decay[i].until_s - a.attack_s),
                                        std::max(0.0, *b.decay[i].until_s - b.attack_s), w);
                s.until_s = e.attack_s + tau;
            }
            e.decay.push_back(s);
        }
        return e;
    }
    // Different segment counts, or a hold or rise in either: the level lines themselves interpolated in dB at every breakpoint
    // of either (tau after each attack); each piece's T60 from the interpolated line's slope.
    std::vector<double> taus;
    for (const auto* env : {&a, &b}) {
        for (const decay_segment& s : env->decay) {
            if (s.until_s && *s.until_s > env->attack_s) taus.push_back(*s.until_s - env->attack_s);
        }
    }
    std::sort(taus.begin(), taus.end());
    taus.erase(std::unique(taus.begin(), taus.end()), taus.end());
    const auto level_at = [&](double tau) {
        const double la = envelope_level(a, a.attack_s + tau).db - a.peak.db + peak_a_db;
        const double lb = envelope_level(b, b.attack_s + tau).db - b.peak.db + peak_b_db;
        return lerp(la, lb, w);
    };
    double start = 0.0;
    for (std::size_t i = 0; i <= taus.size(); ++i) {
        const bool last = i == taus.size();
        const double end = last ? start + 1.0 : taus[i];  // the last piece's slope over its first second
        const double slope_db_per_s = (level_at(end) - level_at(start)) / (end - start);
        decay_segment s{.t60_s = slope_db_per_s == 0.0 ? infinity : -db_per_t60 / slope_db_per_s, .until_s = {}};
        if (!last) s.until_s = e.attack_s + end;
        e.decay.push_back(s);
        start = end;
    }
    return e;
}

/// Pairs of matched partial indices (into a and b); -1 where a partial has no partner.
struct match_result {
    std::vector<int> b_of_a;
    std::vector<int> a_of_b;
};

match_result match_partials(const patch& a, const patch& b) {
    match_result m{std::vector<int>(a.partials.size(), -1), std::vector<int>(b.partials.size(), -1)};
    if (is_harmonic(a) && is_harmonic(b)) {
        for (std::size_t i = 0; i < a.partials.size(); ++i) {
            const int n = a.partials[i].harmonic;
            if (n <= 0) continue;
            for (std::size_t j = 0; j < b.partials.size(); ++j) {
                if (b.partials[j].harmonic == n && m.a_of_b[j] < 0) {
                    m.b_of_a[i] = static_cast<int>(j);
                    m.a_of_b[j] = static_cast<int>(i);
                    break;
                }
            }
        }
        return m;
    }
    // By frequency ratio to the root, strongest partials of a first.
    const double ra = root_hz(a.note);
    const double rb = root_hz(b.note);
    std::vector<std::size_t> order(a.partials.size());
    for (std::size_t i = 0; i < order.size(); ++i) order[i] = i;
    std::stable_sort(order.begin(), order.end(), [&](std::size_t x, std::size_t y) {
        return a.partials[x].env.peak.db > a.partials[y].env.peak.db;
    });
    for (const std::size_t i : order) {
        const double ratio_a = a.partials[i].freq_hz / ra;
        int best = -1;
        double best_cents = match_tolerance_cents;
        for (std::size_t j = 0; j < b.partials.size(); ++j) {
            if (m.a_of_b[j] >= 0) continue;
            const double cents = std::fabs(cents_per_octave * std::log2(b.partials[j].freq_hz / rb / ratio_a));
            if (cents < best_cents) {
                best_cents = cents;
                best = static_cast<int>(j);
            }
        }
        if (best >= 0) {
            m.b_of_a[i] = best;
            m.a_of_b[static_cast<std::size_t>(best)] = static_cast<int>(i);
        }
    }
    return m;
}

/// Ratio of a matched pair's frequency to the new root (see the header).
double matched_ratio(const partial& pa, const partial& pb, const patch& a, const patch& b, double w, double b_new) {
    const double ra = pa.freq_hz / root_hz(a.note);
    const double rb = pb.freq_hz / root_hz(b.note);
    const int n = pa.harmonic;
    if (n > 0 && pb.harmonic == n) {
        const double da = ra / (n * series_factor(n, a.note.inharmonicity_b));
        const double db = rb / (n * series_factor(n, b.note.inharmonicity_b));
        return n * series_factor(n, b_new) * log_lerp(da, db, w);
    }
    return log_lerp(ra, rb, w);
}

/// The amplitude weight of a one-sided part in dB; empty when it is left out (weight 0).
std::optional<double> fade_db(double weight) {
    if (!(weight > 0.0)) return std::nullopt;
    return 20.0 * std::log10(weight);
}

void add_partials(const patch& a, const patch& b, double w, double new_root_hz, double b_new, patch& out) {
    const match_result m = match_partials(a, b);
    const bool a_nearer = w < 0.5;
    for (std::size_t i = 0; i < a.partials.size(); ++i) {
        const partial& pa = a.partials[i];
        const double peak_a = pa.env.peak.db + a.note.gain_db;
        if (m.b_of_a[i] < 0) {
            const auto fade = fade_db(1.0 - w);
            if (!fade) continue;
            partial q = pa;
            q.freq_hz = new_root_hz * pa.freq_hz / root_hz(a.note);
            q.env.peak = level_db{peak_a + *fade};
            out.partials.push_back(q);
            continue;
        }
        const partial& pb = b.partials[static_cast<std::size_t>(m.b_of_a[i])];
        partial q;
        q.harmonic = pa.harmonic == pb.harmonic ? pa.harmonic : 0;
        q.freq_hz = new_root_hz * matched_ratio(pa, pb, a, b, w, b_new);
        q.phase_rad = a_nearer ? pa.phase_rad : pb.phase_rad;
        blend_glide(pa, pb, w, q);
        q.env = interpolate_envelope(pa.env, pb.env, peak_a, pb.env.peak.db + b.note.gain_db, w);
        out.partials.push_back(q);
    }
    for (std::size_t j = 0; j < b.partials.size(); ++j) {
        if (m.a_of_b[j] >= 0) continue;
        const auto fade = fade_db(w);
        if (!fade) continue;
        partial q = b.partials[j];
        q.freq_hz = new_root_hz * q.freq_hz / root_hz(b.note);
        q.env.peak = level_db{q.env.peak.db + b.note.gain_db + *fade};
        out.partials.push_back(q);
    }
}

double band_centre_hz(const noise_band& n) { return std::sqrt(n.low_hz * n.high_hz); }

void add_noise(const patch& a, const patch& b, double w, patch& out) {
    std::vector<bool> used(b.noise.size(), false);
    for (const noise_band& na : a.noise) {
        int best = -1;
        double best_oct = band_match_tolerance_octaves;
        for (std::size_t j = 0; j < b.noise.size(); ++j) {
            const double oct = std::fabs(std::log2(band_centre_hz(b.noise[j]) / band_centre_hz(na)));
            if (!used[j] && oct < best_oct) {
                best_oct = oct;
                best = static_cast<int>(j);
            }
        }
        noise_band n = na;
        if (best < 0) {
            const auto fade = fade_db(1.0 - w);
            if (!fade) continue;
            n.env.peak = level_db{na.env.peak.db + a.note.gain_db + *fade};
        } else {
            const noise_band& nb = b.noise[static_cast<std::size_t>(best)];
            used[static_cast<std::size_t>(best)] = true;
            n.low_hz = log_lerp(na.low_hz, nb.low_hz, w);
            n.high_hz = log_lerp(na.high_hz, nb.high_hz, w);
            n.env = interpolate_envelope(na.env, nb.env, na.env.peak.db + a.note.gain_db,
                                         nb.env.peak.db + b.note.gain_db, w);
        }
        out.noise.push_back(n);
    }
    for (std::size_t j = 0; j < b.noise.size(); ++j) {
        const auto fade = fade_db(w);
        if (used[j] || !fade) continue;
        noise_band n = b.noise[j];
        n.env.peak = level_db{n.env.peak.db + b.note.gain_db + *fade};
        out.noise.push_back(n);
    }
}

}  // namespace

double interpolate_t60_s(double t60_a, double t60_b, double w) {
    const bool decays = t60_a > 0.0 && t60_b > 0.0 && std::isfinite(t60_a) && std::isfinite(t60_b);
    if (decays) return log_lerp(t60_a, t60_b, w);
    // As decay rates (dB/s): 0 for a hold, negative for a rise.
    const auto rate = [](double t60) { return std::isfinite(t60) ? db_per_t60 / t60 : 0.0; };
    const double r = lerp(rate(t60_a), rate(t60_b), w);
    return r == 0.0 ? infinity : db_per_t60 / r;
}

patch interpolate_patches(const patch& a, const patch& b, double weight_b, double new_root_hz) {
    assert(root_hz(a.note) > 0.0 && root_hz(b.note) > 0.0 && new_root_hz > 0.0);
    assert(weight_b >= 0.0 && weight_b <= 1.0);
    const double w = weight_b;
    const patch& nearer = w < 0.5 ? a : b;
    patch out;
    out.version = patch_format_version;
    out.note = nearer.note;
    out.source = nearer.source;
    out.note.gain_db = 0.0;  // folded into the levels
    out.note.length_s = std::max(a.note.length_s, b.note.length_s);
    out.note.inharmonicity_b = interpolate_b(a.note.inharmonicity_b, b.note.inharmonicity_b, w);
    const double fa = a.note.f0_hz > 0.0 ? a.note.f0_hz / root_hz(a.note) : 1.0;
    const double fb = b.note.f0_hz > 0.0 ? b.note.f0_hz / root_hz(b.note) : 1.0;
    out.note.f0_hz = new_root_hz * log_lerp(fa, fb, w);
    if (out.note.root.method == root_method::unstated || out.note.root.method == root_method::unpitched) {
        out.note.root.method = root_method::by_hand;
    }
    set_root_hz(out.note, new_root_hz);
    if (!a.note.name.empty() && !b.note.name.empty() && a.note.name != b.note.name && w > 0.0 && w < 1.0) {
        out.note.name = a.note.name + " / " + b.note.name;
    }
    out.source.cut_s.reset();
    add_partials(a, b, w, new_root_hz, out.note.inharmonicity_b, out);
    add_noise(a, b, w, out);
    canonicalize(out);
    return out;
}

}  // namespace wane

#include "pitch/root.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <limits>
#include <optional>
#include <utility>
#include <vector>

#include "core/envelope.hpp"
#include "core/pitch_names.hpp"
#include "core/units.hpp"

namespace wane {

namespace {

/// The strong mode nearest target_hz within tol_rel, or none.
std::optional<root_mode> mode_near(std::span<const root_mode> strong, double target_hz, double tol_rel) {
    std::optional<root_mode> best;
    double best_dist = tol_rel;
    for (const root_mode& m : strong) {
        const double dist = std::abs(m.freq_hz / target_hz - 1.0);
        if (dist <= best_dist) best_dist = dist, best = m;
    }
    return best;
}

double peak_level(const root_mode& m) { return m.level_db; }
/// The heard level where known, else the peak level.
double heard_level(const root_mode& m) { return std::isnan(m.heard_db) ? m.level_db : m.heard_db; }

/// Level over the heard span as its spectrum weighs it where known, else the heard level.
double span_level(const root_mode& m) { return std::isnan(m.span_db) ? heard_level(m) : m.span_db; }

/// The heard centre of the modes within group_rel of freq_hz (Hz): their mean frequency weighted
/// by power over the heard span as its spectrum shows it (db_to_power of span_level), the pitch a
/// group of components too close to sound apart is heard at (as analysis/heard_peaks reads a
/// beating partial 1); freq_hz when none of them sounds over the heard span.
double heard_centre_hz(std::span<const root_mode> modes, double freq_hz, double group_rel) {
    double sum_power = 0.0, sum_power_hz = 0.0;
    for (const root_mode& m : modes) {
        if (!(m.freq_hz > 0.0) || std::abs(m.freq_hz / freq_hz - 1.0) > group_rel) continue;
        const double power = db_to_power(span_level(m));
        sum_power += power, sum_power_hz += power * m.freq_hz;
    }
    return sum_power > 0.0 ? sum_power_hz / sum_power : freq_hz;
}

/// Strike note of a bell: the nominal N, twelfth 1.5 N and upper octave 2 N all strong, with the
/// tierce at 0.6 N (a minor third above N / 2) strong too; the strike note is N / 2, an octave
/// below the nominal, as bell tuners name it (Fletcher and Rossing 1998, ch. 21), taken as the
/// prime's own frequency when a strong prime sits there (a tuned bell). Where several modes could
/// be the nominal, the strongest one is; without a prime, N is the heard centre of the modes
/// (all of them, heard levels) within nominal_group_rel of it (heard_centre_hz).
std::optional<double> strike_note_hz(std::span<const root_mode> strong, std::span<const root_mode> modes,
                                     const root_params& params) {
    const double tol_rel = params.bell_tolerance_rel;
    // Ideal partial ratios of a tuned church bell relative to the strike note (prime): hum 0.5,
    // prime 1, tierce 1.2, quint 1.5, nominal 2, twelfth 3, upper octave 4 (Fletcher and Rossing
    // 1998, ch. 21).
    constexpr double tierce = 1.2, nominal = 2.0, twelfth = 3.0, upper_octave = 4.0;
    std::optional<double> best;
    double best_db = -1e300;
    for (const root_mode& n : strong) {
        const double s = n.freq_hz / nominal;
        const auto t = mode_near(strong, twelfth * s, tol_rel);
        const auto u = mode_near(strong, upper_octave * s, tol_rel);
        const auto m3 = mode_near(strong, tierce * s, tol_rel);
        if (!t || !u || !m3) continue;
        // The hum, an octave below the strike, is the lowest partial of a bell: a strong mode
        // below it means a series of which these are upper members (a string's harmonics 5..20).
        if (strong.front().freq_hz < 0.5 * s * (1.0 - tol_rel)) continue;
        // Bell-tuning practice names the strike note an octave below the nominal; a tuned bell
        // has its prime there, and then the prime is the note.
        const auto prime = mode_near(strong, s, tol_rel);
        if (n.level_db > best_db)
            best_db = n.level_db, best = prime ? prime->freq_hz : heard_centre_hz(modes, n.freq_hz, params.nominal_group_rel) / nominal;
    }
    return best;
}

/// The octave of a series without its partial 1: the largest power of two k (up to 8) that numbers
/// every partial within strong_below_max_db of the strongest numbered one a multiple of k. A series
/// whose strong partials are all even-numbered (2, 4, 8 of f0, nothing odd within that range) is
/// heard an octave up, at its lowest strong partial's octave: a missing fundamental is heard from
/// neighbouring harmonics, odd and even (Terhardt 1974: virtual pitch from a harmonic pattern), and
/// 2, 4, 8 alone are the pattern of 2 f0. A kalimba tine (G3) whose
/// strong numbered partials 196 and 392 Hz (2 and 4 of a 98 Hz series) once had G2 for its root.
int strong_octave(std::span<const root_mode> modes, const root_params& params) {
    double max_db = -infinity;
    for (const root_mode& m : modes)
        if (m.harmonic > 0) max_db = std::max(max_db, m.level_db);
    int k = 1;
    while (k < 8) {
        bool all = true;
        for (const root_mode& m : modes)
            if (m.harmonic > 0 && m.level_db >= max_db - params.strong_below_max_db && m.harmonic % (2 * k) != 0) all = false;
        if (!all) break;
        k *= 2;
    }
    return k;
}

/// The fundamental of a series as measured: the strongest partial numbered 1 when it is within
/// fundamental_below_max_db of the strongest partial (real strings put partial 1 a few cents off
/// the series of the upper partials, and partial 1 is the pitch heard); else the series' f0 (a
/// missing or very weak fundamental), times strong_octave when its strong partials are all even.
/// With from_hint the user's f0 stands as given.
double fundamental_hz(std::span<const root_mode> modes, double series_f0_hz, bool from_hint, const root_params& params) {
    double max_db = -infinity;
    for (const root_mode& m : modes) max_db = std::max(max_db, m.level_db);
    double best_db = max_db - params.fundamental_below_max_db;
    double f = 0.0;
    for (const root_mode& m : modes)
        if (m.harmonic == 1 && m.level_db >= best_db) best_db = m.level_db, f = m.freq_hz;
    if (f > 0.0) return f;
    return from_hint ? series_f0_hz : series_f0_hz * strong_octave(modes, params);
}

/// A harmonic series the upper modes agree on over a lowest strong mode at f1: modes of
/// members_from near n f1 (n = 2..upper_series_max_n, within upper_series_search_rel); with at least upper_series_min_members of them, 2 and 3 among them,
/// their least-squares f = sum n f_n / sum n^2, kept when every member lies within
/// upper_series_fit_rel of n f and f within upper_series_search_rel of f1. The f a section in
/// unison or a wandering fundamental is heard at; none for a tuned bar (1 : 4 : 10, 1 : 3 : 6.x),
/// a bell or a drum head, whose modes are not on 2, 3, 4 times their lowest.
std::optional<double> upper_series_hz(double f1, std::span<const root_mode> members_from, const root_params& params) {
    struct member {
        int n;
        double freq_hz, weight;
    };
    std::vector<member> members;
    for (int n = 2; n <= params.upper_series_max_n; ++n)
        if (const auto m = mode_near(members_from, n * f1, params.upper_series_search_rel))
            members.push_back({n, m->freq_hz, db_to_power(std::isnan(m->heard_db) ? m->level_db : m->heard_db)});
    const auto has = [&](int n) { return std::any_of(members.begin(), members.end(), [n](const member& m) { return m.n == n; }); };
    if (static_cast<int>(members.size()) < params.upper_series_min_members || !has(2) || !has(3)) return {};
    // Weighted least squares of f_n = n f, weights the members' heard power (the louder partials'
    // frequencies are the better measured).
    double num = 0.0, den = 0.0;
    for (const member& m : members) num += m.weight * m.n * m.freq_hz, den += m.weight * m.n * m.n;
    const double f = num / den;
    for (const member& m : members)
        if (std::abs(m.freq_hz / (m.n * f) - 1.0) > params.upper_series_fit_rel) return {};
    if (std::abs(f / f1 - 1.0) > params.upper_series_search_rel) return {};
    return f;
}

/// The modes (of positive frequency) within below_max_db of the strongest by level_of, by
/// frequency.
std::vector<root_mode> strong_modes(std::span<const root_mode> modes, double below_max_db,
                                    double (*level_of)(const root_mode&)) {
    double max_db = -infinity;
    for (const root_mode& m : modes) max_db = std::max(max_db, level_of(m));
    std::vector<root_mode> strong;
    for (const root_mode& m : modes)
        if (level_of(m) >= max_db - below_max_db && m.freq_hz > 0.0) strong.push_back(m);
    std::sort(strong.begin(), strong.end(), [](auto& a, auto& b) { return a.freq_hz < b.freq_hz; });
    return strong;
}

}  // namespace

root_estimate find_root(std::span<const root_mode> modes, double series_f0_hz, bool from_hint,
                        const root_params& params) {
    if (modes.empty()) return {};
    const std::vector<root_mode> strong = strong_modes(modes, params.strong_below_max_db, peak_level);
    const std::vector<root_mode> heard = strong_modes(modes, params.strong_below_max_db, heard_level);
    if (from_hint && series_f0_hz > 0.0) return {fundamental_hz(modes, series_f0_hz, true, params), root_method::f0_hint};
    // A dense wash of modes with no series has no pitch; ratios found in it are chance.
    if (series_f0_hz <= 0.0 && static_cast<int>(strong.size()) > params.unpitched_min_strong_modes) return {};
    if (const auto s = strike_note_hz(strong, modes, params)) return {*s, root_method::strike_note};
    if (series_f0_hz > 0.0) return {fundamental_hz(modes, series_f0_hz, false, params), root_method::harmonic_series};
    if (heard.empty()) return {};
    if (const auto f = upper_series_hz(heard.front().freq_hz, strong_modes(modes, params.upper_series_below_db, heard_level), params))
        return {*f, root_method::harmonic_series};
    return {heard.front().freq_hz, root_method::lowest_mode};
}

double span_weighted_amplitude(const envelope& env, double start_s, double end_s) {
    constexpr int steps = 200;
    double sum = 0.0, wsum = 0.0;
    const std::vector<envelope_piece> pieces = envelope_pieces(env);  // made once, not per point
    for (int j = 1; j < steps; ++j) {
        const double u = static_cast<double>(j) / steps;
        const double w = 0.5 - 0.5 * std::cos(two_pi * u);
        sum += w * envelope_amp(env, pieces, start_s + u * (end_s - start_s)).lin;
        wsum += w;
    }
    return sum / wsum;
}

double heard_level_db(const envelope& env) {
    constexpr int points = 101;  // every 10 ms
    const std::vector<envelope_piece> pieces = envelope_pieces(env);
    double sum_power = 0.0;  // mean of amp^2 over the span
    for (int i = 0; i < points; ++i) {
        const double t_s = heard_span_start_s + (heard_span_end_s - heard_span_start_s) * i / (points - 1);
        const double a = envelope_amp(env, pieces, t_s).lin;
        sum_power += a * a;
    }
    return sum_power > 0.0 ? 10.0 * std::log10(sum_power / points) : -std::numeric_limits<double>::infinity();
}

note_root note_root_of(std::span<const partial> partials, double series_f0_hz, bool from_hint) {
    std::vector<root_mode> modes;
    modes.reserve(partials.size());
    bool any_heard = false;
    for (const partial& q : partials) {
        const double heard_db = heard_level_db(q.env);
        any_heard = any_heard || std::isfinite(heard_db);
        const double span_amp = span_weighted_amplitude(q.env, heard_span_start_s, heard_span_end_s);
        modes.push_back({.freq_hz = q.freq_hz, .level_db = q.env.peak.db, .harmonic = q.harmonic, .heard_db = heard_db,
                         .span_db = span_amp > 0.0 ? 20.0 * std::log10(span_amp) : -infinity});
    }
    // A note shorter than the heard span's start: the peak levels stand for what is heard.
    if (!any_heard)
        for (root_mode& m : modes) m.heard_db = m.span_db = std::numeric_limits<double>::quiet_NaN();
    const root_estimate r = find_root(modes, series_f0_hz, from_hint);
    if (r.method == root_method::unpitched || !(r.freq_hz > 0.0)) return {.method = root_method::unpitched};
    return root_from_hz(r.freq_hz, r.method);
}

note_root root_from_hz(double freq_hz, root_method method, double a4_hz) {
    assert(freq_hz > 0.0 && a4_hz > 0.0);
    const double midi = hz_to_midi(freq_hz, a4_hz);
    const double nearest = std::round(midi);
    constexpr double cents_per_semitone = 100.0;
    return {.midi = static_cast<int>(nearest), .tuning_cents = (midi - nearest) * cents_per_semitone,
            .a4_hz = a4_hz, .method = method};
}

}  // namespace wane

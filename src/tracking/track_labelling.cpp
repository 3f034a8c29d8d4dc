// Ranking the tracks, their frequencies, harmonic numbers and the refitted series (see
// tracker_steps.hpp).
#include <algorithm>
#include <cmath>
#include <numeric>
#include <vector>

#include "core/harmonics.hpp"
#include "core/units.hpp"
#include "pitch/root.hpp"
#include "tracking/pitch.hpp"
#include "tracking/tracker.hpp"
#include "tracking/tracker_steps.hpp"
#include "tracking/tracker_tuning.hpp"

namespace wane {

namespace {

using namespace tracker_tuning;

/// Value where the cumulative weight (values sorted) first reaches half the total.
double weighted_median(std::vector<double> v, std::vector<double> w) {
    std::vector<std::size_t> idx(v.size());
    std::iota(idx.begin(), idx.end(), std::size_t{0});
    std::sort(idx.begin(), idx.end(), [&](auto a, auto c) { return v[a] < v[c]; });
    const double half = 0.5 * std::accumulate(w.begin(), w.end(), 0.0);
    double acc = 0.0;
    for (std::size_t i : idx)
        if ((acc += w[i]) >= half) return v[i];
    return v[idx.back()];
}

}  // namespace

double track_frequency_hz(const partial_track& track, double window_s) {
    std::vector<double> f;
    // The track's frequency: amplitude-weighted median over its settled part (after the
    // attack's glide, clear of the noise), so the loud early part, where the pitch is heard,
    // counts most; all points when that part is empty.
    const double settle_s = std::max(attack_skip_s, attack_skip_windows * window_s);
    std::vector<double> w;
    for (const auto& pt : track.points)
        if (pt.time_s >= settle_s && pt.level_db >= pt.floor_db + settled_snr_db) {
            f.push_back(pt.freq_hz);
            w.push_back(to_amp(level_db{pt.level_db}).lin);
        }
    if (f.empty())
        for (const auto& pt : track.points) f.push_back(pt.freq_hz), w.push_back(1.0);
    return weighted_median(std::move(f), std::move(w));
}

namespace tracker_steps {

namespace {

using namespace tracker_tuning;

/// Harmonic numbers of tracks at ascending frequencies freqs (0 = none), up to limit_hz. The
/// lowest is numbered on the series n f0 sqrt(1 + B n^2); walking up, each next one from the
/// nearest numbered track below (the series through it, same B), since real strings drift from
/// the law at high n and the global series can be a whole number off there. Equal numbers are
/// kept (two tracks of one partial); a track that fits no number above its anchor gets 0.
void label_harmonics(const std::vector<double>& freqs, double f0_hz, double b, double limit_hz,
                     std::vector<int>& harmonic) {
    std::size_t anchor = freqs.size();
    for (std::size_t i = 0; i < freqs.size(); ++i) {
        harmonic[i] = 0;
        if (freqs[i] > limit_hz) continue;
        if (anchor == freqs.size()) {
            harmonic[i] = harmonic_number(freqs[i], f0_hz, b, harmonic_tolerance_rel);
            if (harmonic[i] > 0) anchor = i;
            continue;
        }
        const int n_anchor = harmonic[anchor];
        const double na = n_anchor;
        const double local_f0 = freqs[anchor] / (na * std::sqrt(1.0 + b * na * na));
        const int chained = harmonic_number(freqs[i], local_f0, b, harmonic_tolerance_rel);
        if (chained < n_anchor) continue;
        harmonic[i] = chained;
        if (chained > n_anchor) anchor = i;
    }
}

/// The tracks' strength (peak level), frequency and fit weight, by index.
struct track_ranking {
    std::vector<double> strength, rep_freq, weight;
    std::vector<std::size_t> order;  ///< the tracks kept (track_keep), by frequency
};

}  // namespace

std::size_t kept_track_count(std::span<const double> strength_desc, const track_keep& keep) {
    const std::size_t cap = std::min(strength_desc.size(), static_cast<std::size_t>(std::max(keep.max_partials, 0)));
    std::size_t n = std::min(cap, static_cast<std::size_t>(std::max(keep.faint_rank, 0)));
    if (strength_desc.empty()) return 0;
    const double lowest_db = strength_desc.front() - keep.faint_range_db;
    while (n < cap && strength_desc[n] >= lowest_db) ++n;
    return n;
}

namespace {

track_ranking rank_tracks(const std::vector<partial_track>& done, double window_s, const track_keep& keep) {
    track_ranking r;
    std::vector<double>& strength = r.strength;
    std::vector<double>& rep_freq = r.rep_freq;
    std::vector<double>& weight = r.weight;
    strength.resize(done.size());
    rep_freq.resize(done.size());
    weight.resize(done.size());
    for (std::size_t i = 0; i < done.size(); ++i) {
        double best = -infinity, best_snr = -infinity;
        for (const auto& pt : done[i].points) {
            best = std::max(best, pt.level_db);
            best_snr = std::max(best_snr, pt.level_db - pt.floor_db);
        }
        rep_freq[i] = track_frequency_hz(done[i], window_s);
        strength[i] = best;
        weight[i] = db_to_power(std::min(best_snr, max_snr_weight_db)) * double(done[i].points.size());
    }
    std::vector<std::size_t>& order = r.order;
    order.resize(done.size());
    std::iota(order.begin(), order.end(), std::size_t{0});
    std::sort(order.begin(), order.end(), [&](auto a, auto c) { return strength[a] > strength[c]; });
    std::vector<double> strength_desc(order.size());
    for (std::size_t i = 0; i < order.size(); ++i) strength_desc[i] = strength[order[i]];
    order.resize(kept_track_count(strength_desc, keep));
    std::sort(order.begin(), order.end(), [&](auto a, auto c) { return rep_freq[a] < rep_freq[c]; });
    return r;
}

/// Numbers the tracks at ascending frequencies freqs on the series, refitting f0 and B as the
/// numbered range grows.
void label_series(const std::vector<double>& freqs, const std::vector<double>& weights, double& f0_hz, double& b,
                  std::vector<int>& harmonic) {
    // Grow the numbered range: fit the series on the partials up to a limit, then double it.
    // A stiff string's upper partials drift by whole harmonics from a B = 0 guess, so they
    // are numbered only once the lower ones have fixed f0 and B.
    const double top_hz = freqs.empty() ? 0.0 : freqs.back();
    double limit_hz = first_label_harmonics * f0_hz;
    for (int round = 0;; ++round) {
        label_harmonics(freqs, f0_hz, b, limit_hz, harmonic);
        const series_fit fit = fit_labelled_series(harmonic, freqs, weights);
        if (fit.used > 0) {
            f0_hz = fit.f0_hz;
            b = fit.inharmonicity_b;
        }
        if (limit_hz >= top_hz && round >= b_fit_rounds) break;
        limit_hz *= 2.0;
    }
    label_harmonics(freqs, f0_hz, b, infinity, harmonic);
}

/// Mean power of a track over the heard span (pitch/root.hpp), linear, over the span's frames;
/// 0 when it has no point there.
double heard_power(const partial_track& track, double hop_s) {
    double sum = 0.0;
    for (const auto& pt : track.points)
        if (pt.time_s >= heard_span_start_s && pt.time_s < heard_span_end_s) sum += db_to_power(pt.level_db);
    const double span_frames = (heard_span_end_s - heard_span_start_s) / hop_s;
    return sum / span_frames;
}

/// Whether the numbered tracks are what is heard: the track heard most over the heard span is
/// numbered, and another track with a different number is heard within series_heard_below_db of
/// it. A struck bar's fundamental with inharmonic overtones, a few of which lie near the members
/// of some series by chance (a glockenspiel's modes at 3.71, 5.64, 7.56 and 8.49 times its
/// fundamental near harmonics 4, 6, 8 and 9 of a pitch a semitone below it), is not a series:
/// the sieve over the attack's peaks finds one there or not as the frames fall. True when no
/// track sounds over the span (a note too short to tell).
bool series_is_heard(const std::vector<partial_track>& done, const std::vector<std::size_t>& order,
                     const std::vector<int>& harmonic, double hop_s) {
    std::vector<double> heard(order.size());
    std::size_t loudest = 0;
    for (std::size_t i = 0; i < order.size(); ++i) {
        heard[i] = heard_power(done[order[i]], hop_s);
        if (heard[i] > heard[loudest]) loudest = i;
    }
    if (order.empty() || !(heard[loudest] > 0.0)) return true;
    if (harmonic[loudest] < 1) return false;
    const double floor_power = heard[loudest] * db_to_power(-series_heard_below_db);
    for (std::size_t i = 0; i < order.size(); ++i)
        if (harmonic[i] > 0 && harmonic[i] != harmonic[loudest] && heard[i] >= floor_power) return true;
    return false;
}

}  // namespace

series_fit fit_labelled_series(const std::vector<int>& harmonic, const std::vector<double>& freq_hz,
                               const std::vector<double>& weight) {
    std::vector<series_point> pts;
    for (std::size_t i = 0; i < harmonic.size(); ++i) {
        if (harmonic[i] < 1 || weight[i] <= 0.0) continue;
        auto it = std::find_if(pts.begin(), pts.end(), [&](const series_point& p) { return p.harmonic == harmonic[i]; });
        if (it == pts.end()) pts.push_back({harmonic[i], freq_hz[i], weight[i]});
        else if (weight[i] > it->weight) *it = {harmonic[i], freq_hz[i], weight[i]};
    }
    return fit_series(pts);
}

void label_tracks(std::vector<partial_track>& done, double f0_hz, double b, std::optional<double> f0_override,
                  const track_keep& keep, tracking_result& result) {
    const track_ranking r = rank_tracks(done, result.window_s, keep);
    const std::vector<std::size_t>& order = r.order;
    std::vector<int> harmonic(order.size(), 0);
    std::vector<double> freqs(order.size()), weights(order.size());
    for (std::size_t i = 0; i < order.size(); ++i) freqs[i] = r.rep_freq[order[i]];
    if (f0_override) {
        // The hint numbers the partials: B of the survey only when the hint agrees with its f0.
        constexpr double same_f0_rel = 0.03;
        if (!(f0_hz > 0.0 && std::abs(*f0_override / f0_hz - 1.0) < same_f0_rel)) b = 0.0;
        f0_hz = *f0_override;
    }
    if (f0_hz > 0.0) {
        for (std::size_t i = 0; i < order.size(); ++i) weights[i] = r.weight[order[i]];
        label_series(freqs, weights, f0_hz, b, harmonic);
        // The hint's series stands (the user named the pitch); a series nothing heard rests on goes.
        if (!f0_override && !series_is_heard(done, order, harmonic, result.hop_s)) {
            f0_hz = 0.0;
            std::fill(harmonic.begin(), harmonic.end(), 0);
        }
    }
    result.series_f0_hz = f0_hz;
    result.inharmonicity_b = f0_hz > 0.0 ? b : 0.0;
    result.f0_hz = f0_hz;  // the fundamental of the fitted series (pitch/series_fit.hpp)
    for (std::size_t i = 0; i < order.size(); ++i) {
        partial_track t = std::move(done[order[i]]);
        t.harmonic = harmonic[i];
        result.tracks.push_back(std::move(t));
    }
}

}  // namespace tracker_steps

}  // namespace wane

#include "analysis/heard_peaks.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <complex>
#include <optional>
#include <vector>

#include "analysis/span_peaks.hpp"
#include "core/cosine_walk.hpp"
#include "core/units.hpp"
#include "modes/narrowband.hpp"
#include "spectrum/stft.hpp"

namespace wane {

namespace {

using span_spectrum = heard_span_spectrum;

/// Magnitude spectrum of note over [start_s, end_s) under a periodic Hann window, zero padded.
span_spectrum spectrum_over(std::span<const float> note, double fs, double start_s, double end_s, int zero_padding) {
    span_spectrum s{.mag = {}, .bin_hz = 0.0, .start_s = start_s, .end_s = end_s};
    const auto a = static_cast<std::size_t>(std::llround(start_s * fs));
    const auto b = std::min(note.size(), static_cast<std::size_t>(std::llround(end_s * fs)));
    assert(a < b);
    const std::size_t n = b - a;
    const int size = fast_fft_size(zero_padding * static_cast<int>(n));
    std::vector<float> buffer(n);  // the windowed span; real_fft pads it with zeros to size
    double wsum = 0.0;
    cosine_walk cos_i(two_pi, static_cast<double>(n));  // cos(2 pi i / n)
    for (std::size_t i = 0; i < n; ++i) {
        const double c = cos_i.next();
        // Hann: w = 0.5 - 0.5 cos(2 pi i / n) (periodic form)
        const double w = 0.5 - 0.5 * c;
        buffer[i] = static_cast<float>(w * static_cast<double>(note[a + i]));
        wsum += w;
    }
    std::vector<std::complex<float>> bins(static_cast<std::size_t>(size) / 2 + 1);
    real_fft(buffer, size, bins);
    s.mag.resize(bins.size());
    // The float parts' squares are exact in double: |X| without hypot's scaling.
    for (std::size_t k = 0; k < bins.size(); ++k) {
        const double re = bins[k].real(), im = bins[k].imag();
        s.mag[k] = 2.0 / wsum * std::sqrt(re * re + im * im);
    }
    s.bin_hz = fs / static_cast<double>(size);
    return s;
}

/// The partial's amplitude over the span as the span's spectrum weighs it: the Hann-weighted mean
/// of its track's amplitudes (0 without frames in the span).
double span_amplitude(const partial_track& track, const span_spectrum& s) {
    double sum = 0.0, wsum = 0.0;
    for (const track_point& q : track.points) {
        const double u = (q.time_s - s.start_s) / (s.end_s - s.start_s);
        if (u <= 0.0 || u >= 1.0) continue;
        const double w = 0.5 - 0.5 * std::cos(two_pi * u);
        sum += w * to_amp(level_db{q.level_db}).lin;
        wsum += w;
    }
    return wsum > 0.0 ? sum / wsum : 0.0;
}

/// Phase at t = 0 for freq_hz: phase - 2 pi f t averaged on the circle (amplitude weights) over
/// the track's loudest frame and the three after it (fitting/envelope_fit anchors at the peak too).
double phase_at_zero(const partial_track& track, double freq_hz, double fallback_rad) {
    constexpr std::size_t frames = 4;
    const auto& pts = track.points;
    if (pts.empty()) return fallback_rad;
    const auto loudest = static_cast<std::size_t>(std::distance(
        pts.begin(), std::max_element(pts.begin(), pts.end(),
                                      [](const track_point& x, const track_point& y) { return x.level_db < y.level_db; })));
    double re = 0.0, im = 0.0;
    for (std::size_t i = loudest; i < std::min(pts.size(), loudest + frames); ++i) {
        const double a = to_amp(level_db{pts[i].level_db}).lin;
        const double phi = pts[i].phase_rad - two_pi * freq_hz * pts[i].time_s;
        re += a * std::cos(phi);
        im += a * std::sin(phi);
    }
    return std::remainder(std::atan2(im, re), two_pi);
}

/// The span (seconds after the onset) of a note note_s long; empty (end <= start) when too short.
std::pair<double, double> span_of(double note_s, const heard_peak_params& params) {
    const double long_end_s = params.span_start_s + params.span_s;
    if (note_s >= long_end_s + params.span_start_s) return {params.span_start_s, long_end_s};
    if (note_s - params.short_start_s < params.min_span_s) return {0.0, 0.0};
    return {params.short_start_s, note_s};
}

/// Capture distance of a span spectrum: capture_half_widths main-lobe half-widths (2 / T Hz).
double capture_hz_of(const span_spectrum& s, const heard_peak_params& params) {
    return params.capture_half_widths * 2.0 / (s.end_s - s.start_s);
}

/// Hann-weighted mean amplitude of an envelope over the span (pitch/root.hpp's
/// span_weighted_amplitude: what the span's spectrum shows of a partial at its peak).
double envelope_span_amplitude(const envelope& env, const span_spectrum& s) {
    return span_weighted_amplitude(env, s.start_s, s.end_s);
}

/// Median of s.mag over [low_hz, high_hz].
double median_mag(const span_spectrum& s, double low_hz, double high_hz) {
    const auto last = s.mag.size() - 1;
    const auto lo = std::min(last, static_cast<std::size_t>(std::max(0.0, low_hz / s.bin_hz)));
    const auto hi = std::min(last, static_cast<std::size_t>(std::max(0.0, high_hz / s.bin_hz)));
    std::vector<double> v(s.mag.begin() + static_cast<std::ptrdiff_t>(lo), s.mag.begin() + static_cast<std::ptrdiff_t>(hi) + 1);
    const auto mid = v.begin() + static_cast<std::ptrdiff_t>(v.size() / 2);
    std::nth_element(v.begin(), mid, v.end());
    return *mid;
}

}  // namespace

heard_span_spectrum heard_spectrum(std::span<const float> note, double sample_rate_hz, const heard_peak_params& params) {
    const auto [start_s, end_s] = span_of(static_cast<double>(note.size()) / sample_rate_hz, params);
    if (!(end_s > start_s)) return {};
    return spectrum_over(note, sample_rate_hz, start_s, end_s, params.zero_padding);
}

int move_to_heard_peaks(patch& p, std::span<const partial_track* const> tracks, const heard_span_spectrum& s,
                        const heard_peak_params& params) {
    assert(tracks.size() <= p.partials.size());
    if (s.mag.empty()) return 0;
    const double capture_hz = capture_hz_of(s, params);
    const double max_ratio = std::pow(2.0, params.max_move_cents / 1200.0);

    std::vector<double> amp(tracks.size(), 0.0);
    for (std::size_t i = 0; i < tracks.size(); ++i)
        if (tracks[i] != nullptr) amp[i] = span_amplitude(*tracks[i], s);
    std::vector<double> old_hz(tracks.size());
    for (std::size_t i = 0; i < tracks.size(); ++i) old_hz[i] = p.partials[i].freq_hz;

    int moved = 0;
    for (std::size_t i = 0; i < tracks.size(); ++i) {
        if (!(amp[i] > 0.0)) continue;
        const double f = old_hz[i];
        const double reach_hz = std::min(capture_hz, f * (max_ratio - 1.0));
        // Only a partial that stands alone for its neighbourhood: none stronger over the span within reach.
        bool alone = true;
        for (std::size_t j = 0; j < tracks.size() && alone; ++j)
            alone = j == i || std::abs(old_hz[j] - f) > reach_hz || amp[j] <= amp[i];
        if (!alone) continue;
        const std::size_t k = strongest_peak(s, f - reach_hz, f + reach_hz);
        if (k == 0 || std::abs(20.0 * std::log10(s.mag[k] / amp[i])) > params.level_gate_db) continue;
        const double g = p.partials[i].harmonic == 1 ? group_centre_hz(s, k, f - reach_hz, f + reach_hz, params.group_within_db)
                                                     : peak_freq_hz(s, k);
        if (std::abs(g - f) > reach_hz) continue;
        partial& q = p.partials[i];
        q.freq_hz = g;
        q.phase_rad = phase_at_zero(*tracks[i], g, q.phase_rad);
        if (std::abs(1200.0 * std::log2(g / f)) > 0.01) ++moved;
    }
    return moved;
}


namespace {

/// Peaks of s that look like partials (add_heard_peaks' rules), strongest first.
std::vector<std::size_t> partial_like_peaks(const span_spectrum& s, const heard_peak_params& params) {
    constexpr double lowest_hz = 20.0;  ///< below hearing: no partial
    const double capture_hz = capture_hz_of(s, params);
    const auto isolation = static_cast<std::ptrdiff_t>(std::ceil(params.add_isolation_reaches * capture_hz / s.bin_hz));
    const auto n = static_cast<std::ptrdiff_t>(s.mag.size());
    // The local maxima (over the previous bin, at least the next one), lowest first. The highest
    // point of a stretch [lo, hi] is one of them or an end: its first occurrence rises from its
    // left neighbour and does not fall short of its right one.
    std::vector<std::size_t> maxima;
    for (std::ptrdiff_t k = 1; k + 1 < n; ++k) {
        const auto u = static_cast<std::size_t>(k);
        if (s.mag[u] > s.mag[u - 1] && s.mag[u] >= s.mag[u + 1]) maxima.push_back(u);
    }
    std::vector<std::size_t> peaks;
    double top = 0.0;
    const auto first = static_cast<std::size_t>(std::ceil(lowest_hz / s.bin_hz));
    // The highest local maximum within [lo, hi] as a sliding-window maximum (both ends only grow): a
    // queue of decreasing values, each maximum entered and left once (not ~40 per window).
    std::vector<std::size_t> queue(maxima.size());  // indices into maxima; [head, tail) live
    std::size_t head = 0, tail = 0, next = 0;       // next: the first local maximum not yet entered
    for (const std::size_t u : maxima) {
        if (u < first) continue;
        const auto k = static_cast<std::ptrdiff_t>(u);
        const auto lo = static_cast<std::size_t>(std::max<std::ptrdiff_t>(0, k - isolation));
        const auto hi = static_cast<std::size_t>(std::min(n - 1, k + isolation));
        for (; next < maxima.size() && maxima[next] <= hi; ++next) {
            while (tail > head && s.mag[maxima[queue[tail - 1]]] <= s.mag[maxima[next]]) --tail;
            queue[tail++] = next;
        }
        while (tail > head && maxima[queue[head]] < lo) ++head;
        double highest = std::max(s.mag[lo], s.mag[hi]);
        if (tail > head) highest = std::max(highest, s.mag[maxima[queue[head]]]);
        if (highest > s.mag[u]) continue;
        peaks.push_back(u);
        top = std::max(top, s.mag[u]);
    }
    const double within = std::pow(10.0, -params.add_within_db / 20.0);
    const double clear = std::pow(10.0, params.add_clear_db / 20.0);
    std::erase_if(peaks, [&](std::size_t k) {
        const double f = static_cast<double>(k) * s.bin_hz;
        return s.mag[k] < top * within || s.mag[k] < clear * median_mag(s, f - params.add_floor_hz, f + params.add_floor_hz);
    });
    std::sort(peaks.begin(), peaks.end(), [&](std::size_t a, std::size_t b) { return s.mag[a] > s.mag[b]; });
    return peaks;
}

/// The narrow band around freq_hz and its level (of A cos, A = 2 |y|) at each sample from t = 0 to
/// note_s: all that follow_band_past_fits' test reads (band_track adds phases and floor).
struct band_levels {
    narrowband band;
    std::vector<double> level_db;
    double time_s(std::size_t m) const { return static_cast<double>(m) / band.sample_rate_hz; }
};

band_levels band_levels_of(const note_spectrum& spectrum, double freq_hz, double half_width_hz, double note_s,
                           const heard_peak_params& params) {
    band_levels out{.band = spectrum.band(freq_hz, half_width_hz, params.band_rate_hz), .level_db = {}};
    const narrowband& b = out.band;
    if (b.y.empty()) return out;
    const auto count = std::min(b.y.size(), static_cast<std::size_t>(note_s * b.sample_rate_hz));
    out.level_db.resize(count);
    for (std::size_t m = 0; m < count; ++m) out.level_db[m] = to_level(amp_lin{2.0 * std::abs(b.y[m]) + 1e-30}).db;
    return out;
}

/// The narrow band (band_levels_of's) as a track: one point per level, phase of cos at freq_hz,
/// floor a quantile of the band's level.
partial_track band_track(const band_levels& bl, double freq_hz, const heard_peak_params& params) {
    const narrowband& b = bl.band;
    partial_track t;
    if (bl.level_db.empty()) return t;
    t.points.reserve(bl.level_db.size());
    for (std::size_t m = 0; m < bl.level_db.size(); ++m) {
        const double time_s = bl.time_s(m);
        // y = (A / 2) exp(i (phi + 2 pi (f - f_c) t)): the phase of cos at f, at t.
        const double phase = std::arg(b.y[m]) + two_pi * (b.centre_hz - freq_hz) * time_s;
        t.points.push_back({.time_s = time_s, .freq_hz = freq_hz, .level_db = bl.level_db[m],
                            .phase_rad = std::remainder(phase, two_pi), .floor_db = 0.0});
    }
    std::vector<double> levels = bl.level_db;
    const auto q = levels.begin() + static_cast<std::ptrdiff_t>(params.floor_quantile * static_cast<double>(levels.size() - 1));
    std::nth_element(levels.begin(), q, levels.end());
    for (track_point& pt : t.points) pt.floor_db = *q;
    return t;
}

}  // namespace

merge_result merge_late_companions(patch& p, std::span<const partial_track* const> tracks,
                                   std::span<const double> fit_end_s, std::span<const float> note,
                                   double sample_rate_hz, const heard_peak_params& params) {
    assert(tracks.size() <= p.partials.size());
    merge_result out;
    const double note_s = static_cast<double>(note.size()) / sample_rate_hz;
    const auto [start_s, end_s] = span_of(note_s, params);
    if (!(end_s > start_s)) return out;
    const span_spectrum s{.mag = {}, .bin_hz = 0.0, .start_s = start_s, .end_s = end_s};
    const double reach_hz = params.companion_half_widths * 2.0 / (end_s - start_s);  // Hann main-lobe half-width 2 / T
    std::vector<double> amp(tracks.size(), 0.0);
    for (std::size_t i = 0; i < tracks.size(); ++i)
        if (tracks[i] != nullptr) amp[i] = span_amplitude(*tracks[i], s);
    std::vector<std::size_t> order(tracks.size());
    for (std::size_t i = 0; i < order.size(); ++i) order[i] = i;
    std::sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) { return amp[a] > amp[b]; });

    std::vector<bool> gone(tracks.size(), false);
    for (const std::size_t i : order) {
        if (gone[i] || !(amp[i] > 0.0)) continue;
        std::vector<std::size_t> group;
        for (std::size_t j = 0; j < tracks.size(); ++j) {
            if (j == i || gone[j] || tracks[j] == nullptr || amp[j] > amp[i]) continue;
            if (std::abs(p.partials[j].freq_hz - p.partials[i].freq_hz) > reach_hz) continue;
            // Both present from the strike: a beating pair (two strings), kept apart.
            if (p.partials[j].env.attack_s < params.companion_start_s &&
                p.partials[i].env.attack_s < params.companion_start_s)
                continue;
            group.push_back(j);
        }
        if (group.empty()) continue;
        partial& q = p.partials[i];
        std::size_t last = i;  // the member whose envelope runs on at the end
        for (const std::size_t j : group) {
            const envelope& other = p.partials[j].env;
            const bool first = q.env.attack_s <= other.attack_s;
            const envelope early = first ? q.env : other;
            q.env = spliced_envelope(early, first ? other : q.env, note_s);
            if (!(q.env == early)) last = first ? j : last;  // the later member took over
            else if (!first) last = j;                       // never louder: the earlier member's
            if (!first) q.phase_rad = p.partials[j].phase_rad;  // the start is the other's
            gone[j] = true;
        }
        const bool ran_on = fit_end_s.empty() || tracks[last]->cut_by_end;
        out.kept.push_back({.index = i, .fit_start_s = 0.0, .fit_end_s = ran_on ? note_s : fit_end_s[last]});
    }
    for (std::size_t j = tracks.size(); j-- > 0;)
        if (gone[j]) {
            p.partials.erase(p.partials.begin() + static_cast<std::ptrdiff_t>(j));
            out.removed.insert(out.removed.begin(), j);
        }
    std::sort(out.kept.begin(), out.kept.end(), [](const merged_partial& a, const merged_partial& b) { return a.index < b.index; });
    return out;
}

namespace {

/// The note's spectrum for its narrow bands, zero padded by more than a band's wrap (1 / half-width
/// s, the half-width at least capture_hz) so the wrap reads silence: cache's when it was made of the
/// same samples, else made anew (into cache, or into local without one).
const note_spectrum& whole_note_spectrum(band_spectrum_cache* cache, std::optional<note_spectrum>& local,
                                         std::span<const float> note, double sample_rate_hz, double capture_hz) {
    std::optional<note_spectrum>& slot = cache != nullptr ? cache->spectrum : local;
    if (cache != nullptr && slot && (cache->note.data() != note.data() || cache->note.size() != note.size())) slot.reset();
    if (!slot) {
        slot.emplace(note, sample_rate_hz,
                     note.size() + static_cast<std::size_t>(std::ceil(2.0 / capture_hz * sample_rate_hz)));
        if (cache != nullptr) cache->note = note;
    }
    return *slot;
}

}  // namespace

int add_heard_peaks(patch& p, std::span<const float> note, double sample_rate_hz, const heard_span_spectrum& s,
                    const heard_peak_params& params, const envelope_fit_params& fit_params, band_spectrum_cache* cache) {
    const double note_s = static_cast<double>(note.size()) / sample_rate_hz;
    if (s.mag.empty() || params.max_added <= 0 || s.end_s - s.start_s < params.min_add_span_s) return 0;
    const double capture_hz = capture_hz_of(s, params);
    const double lobe_hz = 2.0 / (s.end_s - s.start_s);  // Hann main-lobe half-width
    std::vector<double> amp;
    for (const partial& q : p.partials) amp.push_back(envelope_span_amplitude(q.env, s));
    const double gate = std::pow(10.0, -params.level_gate_db / 20.0);

    std::vector<std::size_t> missing;
    for (const std::size_t k : partial_like_peaks(s, params)) {
        const double f = static_cast<double>(k) * s.bin_hz;
        bool accounted = false;
        for (std::size_t i = 0; i < p.partials.size() && !accounted; ++i)
            accounted = std::abs(p.partials[i].freq_hz - f) <= lobe_hz && amp[i] >= gate * s.mag[k];
        if (!accounted) missing.push_back(k);
        if (static_cast<int>(missing.size()) == params.max_added) break;
    }
    if (missing.empty()) return 0;
    std::optional<note_spectrum> local;
    const note_spectrum& spectrum = whole_note_spectrum(cache, local, note, sample_rate_hz, capture_hz);
    int added = 0;
    for (const std::size_t k : missing) {
        const double f = peak_freq_hz(s, k);
        const partial_track t = band_track(band_levels_of(spectrum, f, capture_hz, note_s, params), f, params);
        const auto fit = fit_partial(t, fit_params);
        if (!fit || !(fit->env.peak.db < 0.0)) continue;
        p.partials.push_back({.freq_hz = f, .harmonic = 0, .phase_rad = fit->phase_rad, .env = fit->env, .place = {}});
        ++added;
    }
    return added;
}

namespace {

/// Whether the last decay segment does not fall (a held or rising level).
bool last_holds(const envelope& env) {
    return env.decay.empty() || !(t60_to_slope_db_per_s(env.decay.back().t60_s) < 0.0);
}

/// env up to from_s, then band's decay segments from from_s on (the first from there, also when the
/// band peaks later: a narrow band's rise is smeared over about 1 / its width).
void continue_with_band(envelope& env, const envelope& band, double from_s) {
    env.decay.back().until_s = from_s;
    for (const decay_segment& d : band.decay)
        if (!d.until_s || *d.until_s > from_s) env.decay.push_back(d);
}

/// Distance from partial i's frequency to the nearest other partial's, Hz (infinity when alone).
double nearest_other_hz(const patch& p, std::size_t i) {
    double d = infinity;
    for (std::size_t j = 0; j < p.partials.size(); ++j)
        if (j != i) d = std::min(d, std::abs(p.partials[j].freq_hz - p.partials[i].freq_hz));
    return d;
}

/// Whether env stands more than over_db over the band's level (the power mean of its points within
/// +-smoothing_s: not a beat's trough or a noise dip) at a run of points after from_s longer than
/// longer_than_s (points times their spacing); stops at the first such run.
bool over_band_longer_than(const envelope& env, const band_levels& band, double from_s, double over_db,
                           double smoothing_s, double longer_than_s) {
    const std::vector<double>& level = band.level_db;
    if (level.size() < 2) return 0.0 > longer_than_s;
    const double step_s = band.time_s(1) - band.time_s(0);
    const auto half = static_cast<std::size_t>(std::floor(smoothing_s / step_s));
    std::vector<double> power(level.size());  // 10^(level / 10) of each point
    for (std::size_t i = 0; i < level.size(); ++i) power[i] = db_to_power(level[i]);
    const auto pieces = envelope_pieces(env);
    std::size_t run = 0;
    for (std::size_t i = 0; i < level.size(); ++i) {
        const double time_s = band.time_s(i);
        if (time_s <= from_s) continue;
        const std::size_t a = i > half ? i - half : 0, b = std::min(level.size() - 1, i + half);
        double sum = 0.0;  // the power mean over the points within +-half
        for (std::size_t k = a; k <= b; ++k) sum += power[k];
        const double band_db = power_to_db(sum / static_cast<double>(b - a + 1));
        run = envelope_level(env, pieces, time_s).db - band_db > over_db ? run + 1 : 0;
        if (static_cast<double>(run) * step_s > longer_than_s) return true;
    }
    return false;
}

}  // namespace

int follow_band_past_fits(patch& p, std::span<const cut_part> fitted, std::span<const float> note, double sample_rate_hz,
                          const heard_span_spectrum& s, const heard_peak_params& params,
                          const envelope_fit_params& fit_params, band_spectrum_cache* cache) {
    if (s.mag.empty()) return 0;
    const double note_s = static_cast<double>(note.size()) / sample_rate_hz;
    const double capture_hz = capture_hz_of(s, params);
    std::optional<note_spectrum> local;
    const note_spectrum* spectrum = nullptr;  // made only when a partial needs it
    int changed = 0;
    for (std::size_t i = 0; i < fitted.size() && i < p.partials.size(); ++i) {
        const cut_part& f = fitted[i];
        envelope& env = p.partials[i].env;
        if (!(f.fit_end_s < note_s)) continue;
        const double prev_knot_s = env.decay.size() > 1 ? *env.decay[env.decay.size() - 2].until_s : env.attack_s;
        if (!(f.fit_end_s > prev_knot_s)) continue;
        const bool ended_early = f.track == nullptr || !f.track->cut_by_end;  // merged: fit_end_s says
        const bool short_held = ended_early && f.fit_end_s - f.fit_start_s < params.short_fit_s && last_holds(env);
        const double band_hz = std::max(capture_hz, std::min(params.short_fit_band_hz, 0.5 * nearest_other_hz(p, i)));
        if (spectrum == nullptr) spectrum = &whole_note_spectrum(cache, local, note, sample_rate_hz, capture_hz);
        const band_levels levels = band_levels_of(*spectrum, p.partials[i].freq_hz, band_hz, note_s, params);
        if (!short_held && !over_band_longer_than(env, levels, f.fit_end_s, params.over_band_db, params.band_smoothing_s,
                                                  params.over_band_s))
            continue;
        const auto band = fit_partial(band_track(levels, p.partials[i].freq_hz, params), fit_params);  // a track only now
        if (!band || last_holds(band->env)) continue;
        continue_with_band(env, band->env, f.fit_end_s);
        ++changed;
    }
    return changed;
}

}  // namespace wane

// The tracker's frame loop (see tracker_steps.hpp): STFT frames -> peaks -> McAulay-Quatieri
// tracks, with harmonic guidance. No allocation per frame once the buffers have grown.
#include <algorithm>
#include <cmath>
#include <cstdint>
#include <numeric>
#include <span>
#include <string>
#include <vector>

#include "core/harmonics.hpp"
#include "core/units.hpp"
#include "spectrum/peaks.hpp"
#include "spectrum/stft.hpp"
#include "tracking/pitch.hpp"
#include "tracking/tracker_steps.hpp"
#include "tracking/tracker_tuning.hpp"

namespace wane::tracker_steps {

namespace {

/// Room for `more` points at the end of a track: a long track grows by an eighth at a time, not by
/// doubling, so the live tracks of a long note hold at most about 1/8 more than their points (20
/// tracks held for 10 minutes at 12.5 ms hops are 38 MB of points; doubling held up to twice that
/// while growing, and three times it while a vector moved). Still amortized constant time per point.
void make_room(std::vector<track_point>& points, std::size_t more) {
    constexpr std::size_t min_step = 64;
    if (points.size() + more <= points.capacity()) return;
    points.reserve(points.size() + more + std::max(min_step, points.size() / 8));
}

using namespace tracker_tuning;

struct live_track {
    partial_track track;
    int harmonic = 0;
    double guide_lo_hz = 0.0;  ///< a harmonic track takes peaks only in [lo, hi]
    double guide_hi_hz = 0.0;
    int missed = 0;
    double peak_db = -infinity;
};

struct match {
    double cost;
    std::uint32_t track;
    std::uint32_t peak;
};

/// The tracks alive and finished while the frames go by.
class track_set {
public:
    track_set(int min_frames, int max_partials, double f0_hz, double b, double bin_hz, double hop_s)
        : min_frames_(min_frames),
          keep_at_most_(2 * static_cast<std::size_t>(std::max(max_partials, 1))),
          f0_hz_(f0_hz),
          b_(b),
          bin_hz_(bin_hz),
          hop_time_s_(hop_s) {}

    /// One frame: continue tracks on the peaks (sorted by frequency), end the tracks that waited
    /// too long, start tracks on strong unmatched peaks. The peaks come without phases: a point's
    /// phase is read from the frame's bins when a peak becomes one (peak_phase_rad; the same number
    /// find_peaks would give every peak, most of which no track takes).
    void step(const std::vector<spectral_peak>& peaks, std::span<const kiss_fft_cpx> bins, double time_s) {
        double frame_max_db = -infinity;
        for (const auto& p : peaks) frame_max_db = std::max(frame_max_db, p.level_db);
        continue_tracks(peaks, bins, time_s);
        end_unmatched();
        start_tracks(peaks, bins, time_s, frame_max_db);
    }

    bool none_alive() const { return live_.empty(); }
    bool none_done() const { return done_.tracks.empty(); }

    /// Ends every live track at the end of the file and hands out the finished ones.
    frame_tracks finish_all() {
        for (auto& t : live_) {
            const track_point& last = t.track.points.back();
            t.track.cut_by_end = t.missed == 0 && last.level_db >= last.floor_db + cut_above_floor_db;
            finish(t);
        }
        live_.clear();
        return std::move(done_);
    }

private:
    int min_frames_;
    std::size_t keep_at_most_;
    double f0_hz_;
    double b_;
    double bin_hz_;
    double hop_time_s_;
    std::vector<live_track> live_;
    frame_tracks done_;
    std::vector<match> matches_;
    std::vector<bool> peak_used_;
    std::vector<bool> track_used_;

    double dev_hz(double f) const {
        double d = std::max(dev_min_bins * bin_hz_, dev_rel * f);
        if (f0_hz_ > 0.0) d = std::min(d, dev_max_f0 * f0_hz_);
        return d;
    }

    // Finished tracks; when they pile up (long or noisy files) only the 2 x max_partials strongest
    // are kept, so memory follows max_partials. (A weak fragment dropped here is not joined later.)
    void finish(live_track& t) {
        std::vector<partial_track>& done = done_.tracks;
        std::vector<double>& done_peak_db = done_.peak_db;
        const std::size_t keep_at_most = keep_at_most_;
        if (static_cast<int>(t.track.points.size()) < min_frames_) return;
        t.track.points.shrink_to_fit();  // give make_room's slack back
        done.push_back(std::move(t.track));
        done_peak_db.push_back(t.peak_db);
        if (done.size() < 2 * keep_at_most) return;
        std::vector<std::size_t> idx(done.size());
        std::iota(idx.begin(), idx.end(), std::size_t{0});
        std::nth_element(idx.begin(), idx.begin() + static_cast<std::ptrdiff_t>(keep_at_most), idx.end(),
                         [&](auto a, auto c) { return done_peak_db[a] > done_peak_db[c]; });
        idx.resize(keep_at_most);
        std::sort(idx.begin(), idx.end());
        for (std::size_t i = 0; i < idx.size(); ++i) {
            if (idx[i] == i) continue;  // idx is sorted, so idx[i] >= i: no self-move
            done[i] = std::move(done[idx[i]]);
            done_peak_db[i] = done_peak_db[idx[i]];
        }
        done.resize(keep_at_most);
        done_peak_db.resize(keep_at_most);
    }

    void continue_tracks(const std::vector<spectral_peak>& peaks, std::span<const kiss_fft_cpx> bins, double time_s) {
        // Candidate (track, peak) pairs within the deviation limit; peaks are sorted by frequency.
        matches_.clear();
        for (std::uint32_t ti = 0; ti < live_.size(); ++ti) {
            const track_point& last = live_[ti].track.points.back();
            const double d = dev_hz(last.freq_hz);
            auto it = std::lower_bound(peaks.begin(), peaks.end(), last.freq_hz - d,
                                       [](const spectral_peak& p, double f) { return p.freq_hz < f; });
            for (; it != peaks.end() && it->freq_hz <= last.freq_hz + d; ++it) {
                if (live_[ti].harmonic > 0 && (it->freq_hz < live_[ti].guide_lo_hz || it->freq_hz > live_[ti].guide_hi_hz))
                    continue;  // harmonic guidance: stay on the series member n f0 sqrt(1 + B n^2)
                matches_.push_back({std::abs(it->freq_hz - last.freq_hz) / d, ti,
                                    static_cast<std::uint32_t>(it - peaks.begin())});
            }
        }
        std::sort(matches_.begin(), matches_.end(), [](const match& a, const match& c) { return a.cost < c.cost; });
        peak_used_.assign(peaks.size(), false);
        track_used_.assign(live_.size(), false);
        for (const match& mt : matches_) {
            if (peak_used_[mt.peak] || track_used_[mt.track]) continue;
            peak_used_[mt.peak] = track_used_[mt.track] = true;
            live_track& t = live_[mt.track];
            const spectral_peak& p = peaks[mt.peak];
            make_room(t.track.points, static_cast<std::size_t>(t.missed) + 1);
            bridge_gap(t.track, t.missed, {.freq_hz = p.freq_hz, .level_db = p.level_db, .floor_db = p.floor_db},
                       hop_time_s_);
            t.missed = 0;
            t.track.points.push_back({.time_s = time_s, .freq_hz = p.freq_hz, .level_db = p.level_db,
                                      .phase_rad = peak_phase_rad(bins, p.bin, p.offset_bins), .floor_db = p.floor_db});
            t.peak_db = std::max(t.peak_db, p.level_db);
        }
    }

    /// Unmatched tracks wait up to max_gap_frames, then end.
    void end_unmatched() {
        std::size_t keep = 0;
        for (std::size_t ti = 0; ti < live_.size(); ++ti) {
            if (!track_used_[ti] && ++live_[ti].missed > max_gap_frames) {
                finish(live_[ti]);
                continue;
            }
            if (keep != ti) live_[keep] = std::move(live_[ti]);
            ++keep;
        }
        live_.resize(keep);
    }

    /// Births: strong unmatched peaks.
    void start_tracks(const std::vector<spectral_peak>& peaks, std::span<const kiss_fft_cpx> bins, double time_s,
                      double frame_max_db) {
        for (std::size_t pk = 0; pk < peaks.size(); ++pk) {
            const spectral_peak& p = peaks[pk];
            if (peak_used_[pk] || p.level_db < p.floor_db + birth_above_floor_db ||
                p.level_db < frame_max_db - birth_below_max_db)
                continue;
            live_track t;
            t.harmonic = harmonic_number(p.freq_hz, f0_hz_, b_, harmonic_tolerance_rel);
            if (t.harmonic > 0) {
                // The band harmonic_number(f, f0, B, 2 x tolerance) maps to this n.
                const double nd = t.harmonic;
                const double guide_hz = stiff_partial_hz(f0_hz_, b_, t.harmonic);
                const double tol = std::min(guide_tolerance_rel, 0.25 / nd);
                t.guide_lo_hz = guide_hz * (1.0 - tol);
                t.guide_hi_hz = guide_hz * (1.0 + tol);
            }
            t.peak_db = p.level_db;
            t.track.points.push_back({.time_s = time_s, .freq_hz = p.freq_hz, .level_db = p.level_db,
                                      .phase_rad = peak_phase_rad(bins, p.bin, p.offset_bins), .floor_db = p.floor_db});
            live_.push_back(std::move(t));
        }
    }
};

/// The fewest frames a kept track has: at least `frames`, and at least `windows` window lengths.
int min_track_length_frames(int frames, double windows, const tracking_result& result) {
    return std::max(frames, static_cast<int>(std::ceil(windows * result.window_s / result.hop_s)));
}

}  // namespace

frame_tracks run_frames(std::span<const float> x, double fs, std::int64_t onset, float dc, const frame_grid& grid,
                        double f0_hz, double b, int max_partials, tracking_result& result) {
    const int n = grid.window_length;
    const int m = grid.fft_size;
    const std::int64_t hop = grid.hop;
    stft_plan plan({.window = result.window, .window_length = n, .fft_size = m});
    const int bin_count = m / 2 + 1;
    const double bin_hz = fs / m;
    noise_floor floor(bin_count, bin_hz, result.hop_s);
    std::vector<double> floor_sum(floor.bands_db().size(), 0.0);
    std::vector<spectral_peak> peaks;
    const std::int64_t h = plan.half_length();
    const auto size = static_cast<std::int64_t>(x.size());
    const int min_frames = min_track_length_frames(min_track_frames, min_track_windows, result);
    if (const std::int64_t fitting = size - h - onset; fitting < 0 || fitting / hop + 1 < min_frames) {
        const double need_s = double(2 * h + (min_frames - 1) * hop) / fs;
        refuse("too short after the onset: " + std::to_string(std::lround(double(size - onset) / fs * 1000.0)) +
               " ms of sound, the " + std::to_string(std::lround(result.window_s * 1000.0)) +
               " ms analysis window needs at least " + std::to_string(std::lround(need_s * 1000.0)) + " ms");
    }
    // A short note keeps shorter tracks (the refusal above stays on the long rule).
    const bool short_note = double(size - onset) / fs < short_note_s;
    const int keep_frames =
        short_note ? min_track_length_frames(short_min_track_frames, short_min_track_windows, result) : min_frames;
    track_set tracks(keep_frames, max_partials, f0_hz, b, bin_hz, result.hop_s);
    int frames = 0;
    int quiet_frames = 0;
    for (std::int64_t centre = onset; centre + h <= size || frames == 0; centre += hop, ++frames) {
        const double time_s = double(centre - onset) / fs;
        plan.analyze(x, centre, dc);
        floor.update(plan.power());
        for (std::size_t bnd = 0; bnd < floor_sum.size(); ++bnd) floor_sum[bnd] += floor.bands_db()[bnd];
        find_peaks(plan.power(), {}, plan.correction(), m, fs, &floor, {.above_floor_db = continue_above_floor_db}, peaks);
        tracks.step(peaks, plan.bins(), time_s);
        // The note is over once every track has ended and nothing new stood up for a while: the
        // rest of the file is noise (or silence) and would only cost frames.
        quiet_frames = tracks.none_alive() ? quiet_frames + 1 : 0;
        if (!tracks.none_done() && double(quiet_frames) * result.hop_s >= quiet_stop_s) {
            ++frames;  // this frame is counted in floor_sum
            break;
        }
    }
    result.floor_band_hz = floor.band_hz();
    result.floor_db.resize(floor_sum.size());
    for (std::size_t bnd = 0; bnd < floor_sum.size(); ++bnd) result.floor_db[bnd] = floor_sum[bnd] / frames;
    return tracks.finish_all();
}

}  // namespace wane::tracker_steps

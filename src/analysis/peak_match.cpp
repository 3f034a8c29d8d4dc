#include "analysis/peak_match.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <optional>
#include <span>
#include <utility>
#include <vector>

#include "core/patch_numbers.hpp"
#include "core/units.hpp"
#include "synthesis/noise_render.hpp"
#include "synthesis/render.hpp"
#include "synthesis/render_bound.hpp"

namespace wane {

namespace {

/// A peak |sample| as a level (0 dBFS = 1).
double peak_level_db(float peak) { return to_level(amp_lin{static_cast<double>(peak)}).db; }

/// Peak |sample| of x as a level.
double peak_level_db(std::span<const float> x) {
    float peak = 0.0f;
    for (float v : x) peak = std::max(peak, std::abs(v));
    return peak_level_db(peak);
}

/// One past the last sample of the render r holds the figures of within peak_window_db of its
/// peak (r made from q and params).
std::size_t loud_end(const block_peaks& r, const patch& q, const render_params& params) {
    const double peak_db = peak_level_db(r.peak);
    if (!std::isfinite(peak_db)) return 0;
    const auto floor_lin = static_cast<float>(to_amp(level_db{peak_db - peak_window_db}).lin);
    return r.end_at_or_above(q, params, floor_lin);
}

/// What the peak match keeps of q's render with the default seed (the full render is not kept:
/// on a long note it is the size of the recording).
struct default_peak {
    std::size_t frames = 0;    ///< length of the render
    double peak_db = 0.0;      ///< its peak level
    std::size_t loud_end = 0;  ///< loud_end of it
    /// Its partials' samples over its first frames (block_peaks::partials: the render made in one
    /// piece; else empty), the same at every noise draw.
    std::vector<float> partials;
};

/// q's partials at rate (the default render's), frames [first, first + out.size()): copied from
/// those the default render kept where they reach (the same bits), else rendered, the renderer
/// made at the first need (on most notes none: the draws are rendered over kept frames only).
class draw_partials {
public:
    draw_partials(const patch& q, double rate, std::span<const float> kept) : q_(&q), rate_(rate), kept_(kept) {}
    void render(std::size_t first, std::span<float> out) const {
        if (first + out.size() <= kept_.size()) {
            std::copy_n(kept_.begin() + static_cast<std::ptrdiff_t>(first), out.size(), out.begin());
            return;
        }
        if (!renderer_) renderer_.emplace(*q_, render_params{.sample_rate_hz = rate_});
        renderer_->render(first, out);
    }

private:
    const patch* q_;
    double rate_;
    std::span<const float> kept_;
    mutable std::optional<partial_renderer> renderer_;
};

/// Frames of the other draws rendered at once (all draws side by side; each stretch's noise
/// remade from the draws' seeds: add_noise_band_draws_part, bit for bit the whole render's).
constexpr std::size_t draw_stretch_frames = 128 * render_anchor_frames;

/// The peaks (|sample|) of the draws of seeds, each render at rate of partials and of bands (a
/// patch's, or some of them; frames: the render's length) over frames [0, reach) only, a stretch
/// at a time.
std::vector<float> draw_peaks(std::span<const noise_band> bands, double rate, std::span<const std::uint64_t> seeds,
                              const draw_partials& partials, std::size_t frames, std::size_t reach) {
    const auto fade_from = frames - std::min(frames, static_cast<std::size_t>(std::llround(end_fade_s * rate)));
    std::vector<float> peaks(seeds.size(), 0.0f);
    if (seeds.empty() || reach == 0) return peaks;
    const std::size_t stretch = std::min(reach, draw_stretch_frames);
    std::vector<float> part(stretch);
    std::vector<float> noise(seeds.size() * stretch);
    for (std::size_t first = 0; first < reach; first += stretch) {
        const std::size_t size = std::min(stretch, reach - first);
        partials.render(first, std::span(part).first(size));
        if (first > 0) std::fill(noise.begin(), noise.end(), 0.0f);  // made zeroed for the first stretch
        std::vector<std::span<float>> outs;
        for (std::size_t d = 0; d < seeds.size(); ++d) outs.emplace_back(noise.data() + d * stretch, size);
        // The draws as renders of reach frames (add_noise_band_draws: each as its own render would be).
        add_noise_band_draws_part(bands, {.sample_rate_hz = rate, .gain_db = 0.0}, seeds, reach, first, outs);
        for (std::size_t d = 0; d < seeds.size(); ++d) {
            float peak = peaks[d];
            for (std::size_t i = 0; i < size; ++i) {
                const std::size_t n = first + i;
                // The end fade covers the noise too (render_patch applies it to the sum).
                const float g = n < fade_from ? 1.0f : static_cast<float>(end_fade_gain(n, frames, rate));
                peak = std::max(peak, std::abs(part[i] + g * outs[d][i]));
            }
            peaks[d] = peak;
        }
    }
    return peaks;
}

/// The other draws are first rendered only over the blocks that can come within this (dB) of the
/// default draw's peak: most draws peak there, and a draw that does not is rendered again further.
constexpr double first_reach_db = 1.0;

/// The expected gain (match_copy_peak: the one nearest 0 within peak_tolerance_db of target_db,
/// at most max_peak_raise_db) for an expected peak of expected_db; nullopt where that is not
/// finite. It never rises as expected_db does (each step rounds monotonically), so where it is
/// the same at both ends of a range of expected peaks it is that gain over the whole range.
std::optional<double> gain_for_peak_db(double target_db, double expected_db) {
    if (!std::isfinite(expected_db)) return std::nullopt;
    const double to_target_db = target_db - expected_db;
    return std::min(std::clamp(0.0, to_target_db - peak_tolerance_db, to_target_db + peak_tolerance_db), max_peak_raise_db);
}

/// The quiet bands' bound may add this share of the default draw's peak at most (0.01 dB; only
/// the cost depends on it: bands over it are rendered with the loud ones).
constexpr double quiet_share = 1e-2;
/// How far (relative to the most a render reaches, most_lin) a draw's sample summed with its loud
/// bands alone may round otherwise than with every band: each of the at most max_noise_bands + 1
/// float additions rounds by at most 2^-24 of a running sum under most_lin, 6.1e-5 in all (a
/// bound over it; only the cost depends on it, through how often the loud bands settle the gain).
constexpr double sum_rounding = 1e-4;
/// The loud bands are tried alone only where at least 1 / least_quiet_share_inverse of the bands
/// are quiet (project choice: the cost, not the gain, depends on it).
constexpr std::size_t least_quiet_share_inverse = 2;
/// A margin (dB) on either side of a range of peaks before gain_for_peak_db is read at its ends:
/// far over the rounding of a level's log10, so the ends keep the peaks' order.
constexpr double settle_margin_db = 1e-9;

/// The median of values (odd count: one of them).
double median_of(std::vector<double> values) {
    const auto mid = values.begin() + static_cast<std::ptrdiff_t>(values.size() / 2);
    std::nth_element(values.begin(), mid, values.end());
    return *mid;
}

/// The expected gain from the draws rendered with their loud bands only, where that settles it:
/// a draw's peak over [0, span) (what expected_gain_db's reaches give, the bound holding) lies
/// within the quiet bands' bound of its loud bands' peak (each band its own stream: the loud ones
/// play as in the whole draw; render_bound_margin covers the sums' rounding), and past
/// first_reach under past_lin; the median of the draws' lowest and of their highest peaks, the
/// default draw's own among them, then bracket the draws' median. Nullopt where the gain differs
/// across that range (then every band is rendered).
std::optional<double> settled_by_loud_bands(const patch& q, double rate, const default_peak& def, std::span<const std::uint64_t> seeds,
                                            const draw_partials& partials, std::size_t span, std::size_t first_reach,
                                            double past_lin, double most_lin, double target_db) {
    // Each band's bound over the span alone; the quietest ones while their sum stays under quiet_share.
    std::vector<std::pair<double, std::size_t>> band_bounds;
    patch one;  // q's note with one band at a time
    one.note = q.note;
    for (std::size_t b = 0; b < q.noise.size(); ++b) {
        one.noise.assign(1, q.noise[b]);
        band_bounds.emplace_back(render_bound(one, {.sample_rate_hz = rate}).noise_over(0, span), b);
    }
    std::sort(band_bounds.begin(), band_bounds.end());
    const double allowed = quiet_share * to_amp(level_db{def.peak_db}).lin;
    double quiet_lin = 0.0;
    std::size_t quiet = 0;
    while (quiet < band_bounds.size() && quiet_lin + band_bounds[quiet].first <= allowed) quiet_lin += band_bounds[quiet++].first;
    // The draws' cost goes with their bands (each band's pool of unit frames), and where the
    // loud ones leave the gain open every band is rendered again (19 of 69 tries on the 57 shared
    // and held-out notes, which left out 26% of their bands: about as much lost as saved). With
    // half the bands or more left out: 6 tries there, 5 settled.
    if (quiet == 0 || quiet * least_quiet_share_inverse < band_bounds.size()) return std::nullopt;
    std::vector<bool> is_loud(q.noise.size(), false);
    for (std::size_t k = quiet; k < band_bounds.size(); ++k) is_loud[band_bounds[k].second] = true;
    std::vector<noise_band> loud;  // in the patch's order
    loud.reserve(band_bounds.size() - quiet);
    for (std::size_t b = 0; b < q.noise.size(); ++b)
        if (is_loud[b]) loud.push_back(q.noise[b]);
    const std::vector<float> peaks = draw_peaks(loud, rate, seeds, partials, def.frames, first_reach);
    std::vector<double> low_db{def.peak_db};
    std::vector<double> high_db{def.peak_db};
    // The two sums of a sample differ by the quiet bands and by their rounding (sum_rounding).
    const double rounding_lin = sum_rounding * most_lin;
    for (const float peak : peaks) {
        const double low_lin = static_cast<double>(peak) - quiet_lin - rounding_lin;
        const double high_lin = std::max(static_cast<double>(peak) + quiet_lin + rounding_lin, past_lin);
        low_db.push_back(low_lin > 0.0 ? to_level(amp_lin{low_lin}).db : -infinity);
        high_db.push_back(to_level(amp_lin{high_lin}).db);
    }
    const std::optional<double> low_gain = gain_for_peak_db(target_db, median_of(low_db) - settle_margin_db);
    const std::optional<double> high_gain = gain_for_peak_db(target_db, median_of(high_db) + settle_margin_db);
    if (low_gain && high_gain && *low_gain == *high_gain) return low_gain;
    return std::nullopt;
}

/// The expected gain (gain_for_peak_db) of the median over the draws of the peak (dB) of q
/// rendered at rate (q.note.gain_db = 0); nullopt when that peak is not finite.
/// def: of q's render at rate with the default seed (the full render, not repeated; its kept partials are
/// the draws'); bound: of q's render at rate.
std::optional<double> expected_gain_db(const patch& q, double rate, const default_peak& def, const render_bound& bound,
                                       double target_db, const peak_match_params& params) {
    assert(params.draws >= 1);
    const double default_db = def.peak_db;
    if (q.noise.empty()) return gain_for_peak_db(target_db, default_db);
    // Other draws peak where the default one comes within peak_window_db of its peak (a draw
    // would have to add that much more there): the partials and the draws over that span only.
    const draw_partials partials_of(q, rate, def.partials);
    const std::size_t frames = def.frames;
    const auto margin = static_cast<std::size_t>(std::llround(peak_window_margin_s * rate));
    const std::size_t span = std::min(frames, def.loud_end + margin);
    std::vector<double> peaks_db;
    std::vector<std::uint64_t> seeds;
    for (int k = 0; k < params.draws; ++k) {
        const std::uint64_t seed = params.first_seed + static_cast<std::uint64_t>(k);
        if (seed == params.default_seed) {
            peaks_db.push_back(default_db);
        } else {
            seeds.push_back(seed);
        }
    }
    // A draw's samples past the blocks that can reach level L (synthesis/render_bound) stay under
    // L: its peak over the blocks before is its whole peak when it reaches L there. Every draw
    // peaks at least where its partials less the noise's bound do (blocks.least_peak).
    loudness_blocks blocks;
    {
        std::vector<float> part(std::min(span, draw_stretch_frames));
        for (std::size_t first = 0; first < span; first += part.size()) {
            const std::span<float> stretch = std::span(part).first(std::min(part.size(), span - first));
            partials_of.render(first, stretch);
            blocks.add(stretch, first, bound);
        }
    }
    const double first_level = std::max(blocks.least_peak, to_amp(level_db{default_db - first_reach_db}).lin);
    const std::size_t first_reach = std::min(span, blocks.frames_reaching(first_level / render_bound_margin));
    if (params.settle_by_bound && !seeds.empty() && !blocks.most.empty()) {
        // The most any draw reaches past first_reach (blocks up to span only: the draws are read there).
        double past_lin = 0.0;
        for (std::size_t b = (first_reach + render_anchor_frames - 1) / render_anchor_frames; b < blocks.most.size(); ++b)
            past_lin = std::max(past_lin, blocks.most[b] * render_bound_margin);
        const double most_lin = *std::max_element(blocks.most.begin(), blocks.most.end()) * render_bound_margin;
        if (const auto gain = settled_by_loud_bands(q, rate, def, seeds, partials_of, span, first_reach, past_lin, most_lin, target_db))
            return gain;
    }
    std::vector<float> peaks = draw_peaks(q.noise, rate, seeds, partials_of, frames, first_reach);
    const float lowest = peaks.empty() ? 0.0f : *std::min_element(peaks.begin(), peaks.end());
    if (static_cast<double>(lowest) < first_level / render_bound_margin) {
        const double level = std::max(blocks.least_peak, static_cast<double>(lowest));
        const std::size_t reach = std::min(span, blocks.frames_reaching(level / render_bound_margin));
        if (reach > first_reach) peaks = draw_peaks(q.noise, rate, seeds, partials_of, frames, reach);
    }
    for (const float peak : peaks) peaks_db.push_back(to_level(amp_lin{static_cast<double>(peak)}).db);
    return gain_for_peak_db(target_db, median_of(peaks_db));
}

/// The patch as the file keeps it (numbers rounded: a copy within 0.1 dB of full scale can move
/// by that much when its phases and levels are rounded), without its own gain.
patch as_written(const patch& p) {
    patch q = p;
    patch_numbers::round_to_file_precision(q);
    q.note.gain_db = 0.0;
    return q;
}

/// The default draw's renders (q, gain 0): at the source rate and at default_output_rate_hz
/// (the noise is one signal at every rate, but the partials' sampled peaks and the rate
/// conversion's filter move the peak by a few hundredths of a dB).
struct default_renders {
    default_peak output;     ///< of the render at default_output_rate_hz
    double source_db = 0.0;  ///< peak at the source rate (its own rate when renderable, else 48 kHz)

    /// The gain that keeps both default_render_margin_db under full scale.
    double safe_gain_db() const {
        const double peak_db = std::max(source_db, output.peak_db);
        return std::isfinite(peak_db) ? -default_render_margin_db - peak_db : infinity;
    }
};

/// How far under the output rate's peak the source rate's render is first assumed to peak (they
/// differ by a few hundredths of a dB); only the cost depends on it: a render that peaks lower is
/// rendered again as far as its own partials prove (render_peak).
constexpr double source_peak_guess_db = 0.25;

bool renderable_at(double rate) { return rate >= min_render_rate_hz && rate <= max_render_rate_hz; }

default_renders render_default(const patch& q, double sample_rate_hz, const render_bound& output_bound,
                               const peak_match_params& params) {
    default_renders d;
    // loud_end needs every frame within peak_window_db of the peak: their figures, made a
    // stretch at a time (on a held note they reach minutes into it).
    const render_params output{.sample_rate_hz = default_output_rate_hz, .noise_seed = params.default_seed};
    block_peaks out = block_peaks_within(q, output, output_bound, peak_window_db);
    d.output = {.frames = output_bound.frames(), .peak_db = peak_level_db(out.peak), .loud_end = loud_end(out, q, output),
                .partials = std::move(out.partials)};
    if (sample_rate_hz != default_output_rate_hz && renderable_at(sample_rate_hz)) {
        const render_params source{.sample_rate_hz = sample_rate_hz, .noise_seed = params.default_seed};
        // The source rate's peak lies within hundredths of a dB of the output rate's: a level a
        // little under that stops its render early (synthesis/render_bound: render_peak).
        const double guess_lin = std::isfinite(d.output.peak_db) ? to_amp(level_db{d.output.peak_db - source_peak_guess_db}).lin : 0.0;
        d.source_db = peak_level_db(render_peak(q, source, render_bound(q, source), guess_lin));
    } else {
        d.source_db = d.output.peak_db;
    }
    return d;
}

}  // namespace

peak_match_result match_copy_peak(const patch& p, std::span<const float> note, double sample_rate_hz,
                                  const peak_match_params& params) {
    const patch q = as_written(p);
    const double recording_db = peak_level_db(note);
    const double target_db = std::min(recording_db, -peak_headroom_db);
    const render_bound output_bound(q, {.sample_rate_hz = default_output_rate_hz});
    const default_renders d = render_default(q, sample_rate_hz, output_bound, params);
    // The draws at the default output rate: no rate conversion, and the rate a copy plays at.
    // The fitted level (gain 0) unless the expected peak lies more than the tolerance off.
    const std::optional<double> expected_gain =
        expected_gain_db(q, default_output_rate_hz, d.output, output_bound, target_db, params);
    if (!expected_gain) return {};
    peak_match_result r;
    r.expected_gain_db = *expected_gain;
    // A quiet default draw: its render still peaks within max_default_peak_miss_db of the
    // recording (which may peak over the target).
    const double lowest_db = std::isfinite(d.source_db)
                                 ? std::min(recording_db - max_default_peak_miss_db - d.source_db, max_peak_raise_db)
                                 : -infinity;
    r.gain_db = std::min(std::max(r.expected_gain_db, lowest_db), d.safe_gain_db());
    r.held_down_db = std::max(0.0, r.expected_gain_db - r.gain_db);
    return r;
}

double peak_matching_gain_db(const patch& p, std::span<const float> note, double sample_rate_hz,
                             const peak_match_params& params) {
    return match_copy_peak(p, note, sample_rate_hz, params).gain_db;
}

double render_limited_gain_db(const patch& p, double sample_rate_hz, const peak_match_params& params) {
    patch q = p;  // as the file keeps it, with its gain
    patch_numbers::round_to_file_precision(q);
    std::vector<double> rates{default_output_rate_hz};
    if (sample_rate_hz != default_output_rate_hz && renderable_at(sample_rate_hz)) rates.push_back(sample_rate_hz);
    float peak = 0.0f;
    for (const double rate : rates) {
        for (const std::vector<float>& channel : render_channels(q, {.sample_rate_hz = rate, .noise_seed = params.default_seed}))
            for (const float v : channel) peak = std::max(peak, std::abs(v));
    }
    const double over_db = peak_level_db(peak) + default_render_margin_db;
    if (!(over_db > 0.0)) return p.note.gain_db;
    // The file keeps gains to 0.01 dB (core/patch_numbers.hpp, fmt_level): the step at or below.
    constexpr double gain_step_db = 0.01;
    return std::floor((q.note.gain_db - over_db) / gain_step_db) * gain_step_db;
}

void match_peak(patch& p, std::span<const float> note, double sample_rate_hz, const peak_match_params& params) {
    const peak_match_result first = match_copy_peak(p, note, sample_rate_hz, params);
    p.note.gain_db = first.gain_db;
    double held_down_db = first.held_down_db;
    const auto max_steps = static_cast<int>(std::floor(max_noise_cut_db / noise_step_db));
    for (int step = 0; step < max_steps && held_down_db > max_noise_hold_db && !p.noise.empty(); ++step) {
        for (noise_band& b : p.noise) b.env.peak = level_db{b.env.peak.db - noise_step_db};
        // The partials keep the expected peak's gain; only the default draw's limit is redone.
        const patch q = as_written(p);
        const render_bound output_bound(q, {.sample_rate_hz = default_output_rate_hz});
        p.note.gain_db = std::min(first.expected_gain_db, render_default(q, sample_rate_hz, output_bound, params).safe_gain_db());
        held_down_db = first.expected_gain_db - p.note.gain_db;
    }
}

}  // namespace wane

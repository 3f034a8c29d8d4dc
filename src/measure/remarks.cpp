// Plain sentences about a copy and a patch (see remarks.hpp).
#include "measure/remarks.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <cstdint>

#include "core/text_format.hpp"
#include "core/units.hpp"
#include "spectrum/stft.hpp"

namespace wane {

namespace {

constexpr int zero_padding = 2;
constexpr int main_lobe_half_bins = 4 * zero_padding;  // Blackman-Harris 4-term: +-4 bins unpadded (Harris 1978)
constexpr double tiny_power = 1e-30;

/// "1.12 kHz", "250 Hz".
std::string freq_text(double f_hz) {
    if (f_hz >= 1000.0) return printf_text("%.3g kHz", f_hz / 1000.0);
    return printf_text("%.0f Hz", f_hz);
}

/// "20 ms", "0.5 s", "1.25 s".
std::string time_text(double t_s) {
    if (t_s < 1.0) return printf_text("%.0f ms", 1000.0 * t_s);
    return printf_text("%.3g s", t_s);
}

/// Mean power spectrum of frames centred every half window from onset + window/2 over span_s.
std::vector<double> early_spectrum(stft_plan& plan, std::span<const float> x, std::size_t onset_frames,
                                   std::int64_t span_frames) {
    std::vector<double> mean(plan.power().size(), 0.0);
    const std::int64_t half = plan.half_length();
    int frames = 0;
    for (std::int64_t c = static_cast<std::int64_t>(onset_frames) + half;
         c <= static_cast<std::int64_t>(onset_frames) + std::max(half, span_frames - half); c += half) {
        plan.analyze(x, c);
        for (std::size_t k = 0; k < mean.size(); ++k) mean[k] += static_cast<double>(plan.power()[k]);
        ++frames;
    }
    for (double& v : mean) v = power_to_db(std::max(tiny_power, v / std::max(1, frames)));
    return mean;
}

}  // namespace

std::vector<missing_partial> missing_partials(std::span<const float> a, std::span<const float> b, double sample_rate_hz,
                                              std::size_t onset_frames, const remark_params& params) {
    assert(sample_rate_hz > 0.0);
    const int window_length = std::max(33, static_cast<int>(std::lround(params.spectrum_window_s * sample_rate_hz)) | 1);
    stft_plan plan({.window = window_kind::blackman_harris_4, .window_length = window_length,
                    .fft_size = fast_fft_size(zero_padding * window_length)});
    const auto span = static_cast<std::int64_t>(std::llround(params.spectrum_span_s * sample_rate_hz));
    const std::vector<double> sa = early_spectrum(plan, a, onset_frames, span);
    const std::vector<double> sb = early_spectrum(plan, b, onset_frames, span);
    const double loudest = *std::max_element(sa.begin(), sa.end());
    const auto bins = static_cast<int>(sa.size());
    const double bin_hz = sample_rate_hz / plan.fft_size();
    std::vector<missing_partial> out;
    const double top_hz = params.cells.max_freq_hz > 0.0 ? params.cells.max_freq_hz : infinity;
    for (int k = 1; k + 1 < bins && k * bin_hz < top_hz; ++k) {
        const double level = sa[static_cast<std::size_t>(k)];
        if (level < loudest - params.partial_range_db) continue;
        const int lo = std::max(0, k - main_lobe_half_bins), hi = std::min(bins - 1, k + main_lobe_half_bins);
        const int wide_lo = std::max(0, k - 4 * main_lobe_half_bins), wide_hi = std::min(bins - 1, k + 4 * main_lobe_half_bins);
        bool peak = true;
        double copy_db = -infinity, lowest = infinity;
        for (int j = wide_lo; j <= wide_hi; ++j) {
            const double v = sa[static_cast<std::size_t>(j)];
            lowest = std::min(lowest, v);
            if (j >= lo && j <= hi) {
                if (v > level || (v == level && j < k)) peak = false;
                copy_db = std::max(copy_db, sb[static_cast<std::size_t>(j)]);
            }
        }
        if (!peak || level - lowest < params.partial_prominence_db) continue;
        if (level - copy_db < params.missing_below_db) continue;
        out.push_back({.freq_hz = k * bin_hz, .level_db = level - loudest, .copy_short_db = level - copy_db});
    }
    std::stable_sort(out.begin(), out.end(), [](const missing_partial& x, const missing_partial& y) { return x.level_db > y.level_db; });
    return out;
}

std::string region_sentence(const difference_region& r, double nyquist_hz) {
    std::string where;
    if (r.low_hz <= 0.0 && r.high_hz >= nyquist_hz) where = "across the whole spectrum";
    else if (r.low_hz <= 0.0) where = "below " + freq_text(r.high_hz);
    else if (r.high_hz >= nyquist_hz) where = "above " + freq_text(r.low_hz);
    else if (r.low_hz >= 1000.0) where = printf_text("between %.3g and ", r.low_hz / 1000.0) + freq_text(r.high_hz);
    else where = "between " + freq_text(r.low_hz) + " and " + freq_text(r.high_hz);
    std::string when;
    if (r.from_s <= 0.0 && r.to_end) when = "throughout the note";
    else if (r.from_s <= 0.0) when = "in the first " + time_text(r.to_s);
    else if (r.to_end) when = "from " + time_text(r.from_s) + " to the end";
    else when = "from " + time_text(r.from_s) + " to " + time_text(r.to_s);
    const double size_db = std::abs(r.mean_diff_db);
    return "the copy is " + printf_text(size_db < 10.0 ? "%.1f" : "%.0f", size_db) + " dB too " +
           (r.mean_diff_db > 0.0 ? "loud " : "quiet ") + where + " " + when;
}

copy_remarks remark_on_copy(std::span<const float> a, std::span<const float> b, double sample_rate_hz,
                            std::size_t onset_frames, const remark_params& params) {
    copy_remarks out;
    out.cells = difference_grid(a, b, sample_rate_hz, onset_frames, params.cells);
    out.regions = largest_differences(out.cells, params.cells, params.max_regions);
    out.missing = missing_partials(a, b, sample_rate_hz, onset_frames, params);
    out.rise_a_s = onset_rise_s(a, sample_rate_hz, onset_frames);
    out.rise_b_s = onset_rise_s(b, sample_rate_hz, onset_frames);
    out.onset_smeared = out.rise_b_s > out.rise_a_s + params.smeared_by_s;
    if (!out.missing.empty()) {
        std::string s = out.missing.size() == 1 ? "a partial of the recording is missing from the copy:"
                                                : std::to_string(out.missing.size()) +
                                                      " partials of the recording are missing from the copy:";
        for (std::size_t i = 0; i < out.missing.size() && i < params.missing_listed; ++i) {
            const missing_partial& m = out.missing[i];
            s += (i ? ", " : " ") + freq_text(m.freq_hz) + " (" + printf_text("%.0f", m.level_db) + " dB re the loudest, " +
                 printf_text("%.0f", m.copy_short_db) + " dB quieter in the copy)";
        }
        if (out.missing.size() > params.missing_listed) s += ", ...";
        out.sentences.push_back(s);
    }
    if (out.onset_smeared) {
        out.sentences.push_back("the onset is smeared: the copy takes " + time_text(out.rise_b_s) +
                                " to come within 3 dB of its early peak, the recording " + time_text(out.rise_a_s));
    }
    for (const difference_region& r : out.regions) out.sentences.push_back(region_sentence(r, 0.5 * sample_rate_hz));
    return out;
}

std::vector<std::string> patch_remarks(const patch& p) {
    auto holds = [](const envelope& e) { return !e.decay.empty() && std::isinf(e.decay.back().t60_s); };
    const auto partials = std::count_if(p.partials.begin(), p.partials.end(), [&](const partial& q) { return holds(q.env); });
    const auto bands = std::count_if(p.noise.begin(), p.noise.end(), [&](const noise_band& q) { return holds(q.env); });
    std::vector<std::string> out;
    if (partials + bands > 0) {
        std::string s = std::to_string(partials) + (partials == 1 ? " partial" : " partials");
        if (bands > 0) s += " and " + std::to_string(bands) + (bands == 1 ? " noise band" : " noise bands");
        s += (partials + bands == 1 ? " ends" : " end") + std::string(" in a held level");
        s += p.source.cut_s ? ": the recording was cut at " + time_text(*p.source.cut_s) + " while the note still sounded"
                            : ": the note holds to the end of the recording";
        out.push_back(s);
    } else if (p.source.cut_s) {
        out.push_back("the recording was cut at " + time_text(*p.source.cut_s) +
                      " while the note still sounded: every decay runs on past the cut");
    }
    return out;
}

}  // namespace wane

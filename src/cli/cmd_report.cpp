// wane report SOURCE PATCH -o report.html: one self-contained HTML page showing the fit.
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <memory>
#include <optional>
#include <string>

#include "core/text_format.hpp"
#include "cli/common.hpp"
#include "cli/loudness.hpp"
#include "io/atomic_file.hpp"
#include "io/audio_file.hpp"
#include "io/patch_toml.hpp"
#include "measure/channel_compare.hpp"
#include "measure/compare.hpp"
#include "report/report.hpp"
#include "synthesis/render.hpp"
#include "tracking/tracker.hpp"

namespace wane::cli {

namespace {

std::string num(const char* format, double v) {
    if (!std::isfinite(v)) return v > 0 ? "inf" : "-";
    return printf_text(format, v);
}

/// Audio before the patch's onset kept when the report re-tracks or compares the source: as
/// much as the demo notes and most recordings have before the attack (common practice, no source).
constexpr double lead_in_s = 0.1;

/// The source from lead_in_s before the patch's onset (or the file start) to the end.
std::span<const float> from_patch_onset(const mono_audio& source, const patch& p) {
    const double from_s = std::max(0.0, p.source.onset_s - lead_in_s);
    const auto from = std::min(source.samples.size(), static_cast<std::size_t>(std::llround(from_s * source.sample_rate_hz)));
    return std::span<const float>(source.samples).subspan(from);
}

/// x (starting at the note's onset) placed at at_s in a signal as long as the source, zero elsewhere.
std::vector<float> placed_in_source(std::span<const float> x, double at_s, const mono_audio& source) {
    std::vector<float> out(source.samples.size(), 0.0f);
    const auto at = static_cast<std::ptrdiff_t>(std::llround(at_s * source.sample_rate_hz));
    for (std::size_t n = 0; n < x.size(); ++n) {
        const std::ptrdiff_t k = at + static_cast<std::ptrdiff_t>(n);
        if (k >= 0 && k < static_cast<std::ptrdiff_t>(out.size())) out[static_cast<std::size_t>(k)] = x[n];
    }
    return out;
}

/// The mean of equal-length channels, sample by sample.
std::vector<float> mean_of(const std::vector<std::vector<float>>& channels) {
    std::vector<float> out(channels.front().size(), 0.0f);
    const auto scale = static_cast<float>(1.0 / static_cast<double>(channels.size()));
    for (const std::vector<float>& c : channels)
        for (std::size_t n = 0; n < out.size(); ++n) out[n] += scale * c[n];
    return out;
}

/// Longest source a report draws (our choice, no source): the page embeds the source and the
/// render as audio and a spectrogram, about 8 MB and 40 MB of memory per minute at 48 kHz (a
/// 30-minute input took 1.04 GB and wrote a 231 MB page); 300 s keeps a page under about 40 MB.
constexpr double default_max_report_s = 300.0;

struct report_options {
    double max_input_s = default_max_report_s;
    std::filesystem::path source_path;
    std::filesystem::path patch_path;
    std::filesystem::path out_path;
    double top_hz = 0.0;
};

}  // namespace

double max_report_input_s() { return default_max_report_s; }

void write_analysis_report(const mono_audio& source, const std::filesystem::path& source_path, const patch& p,
                           const tracking_result* tracking, const std::filesystem::path& patch_path,
                           const std::filesystem::path& out_path, double top_hz) {
    // A stereo patch of a stereo source: both channels rendered, the page's other sections show
    // the mixes (the mean of the channels) and the stereo section each channel.
    const bool stereo = is_stereo(p) && source.channels.size() == 2;
    const std::vector<std::vector<float>> copy_channels = stereo ? render_channels(p, {.sample_rate_hz = source.sample_rate_hz})
                                                                 : std::vector<std::vector<float>>{};
    const std::vector<float> render =
        stereo ? mean_of(copy_channels) : render_patch(p, {.sample_rate_hz = source.sample_rate_hz});
    // The loudness rule of every command that renders (cli/loudness.hpp).
    double loudest = peak_abs(render);
    for (const std::vector<float>& c : copy_channels) loudest = std::max(loudest, peak_abs(c));
    refuse_too_loud(loudest, patch_path.string());
    // The render starts at the onset; the source is compared from just before the patch's onset
    // (so a patch made with --start-s meets its own note), and compare_signals aligns the two.
    const std::span<const float> note = from_patch_onset(source, p);
    std::optional<compare_result> comparison;
    std::string comparison_note;
    try {
        comparison = compare_signals(note, render, source.sample_rate_hz, {});
    } catch (const analysis_error& e) {
        comparison_note = std::string("No comparison: ") + e.what() + ".";
    }
    const double from_s = static_cast<double>(source.samples.size() - note.size()) / source.sample_rate_hz;
    // b[n + lag] lines up with a[n] (measure/align.hpp): the render's first sample sits at
    // from_s - lag in the source file; without a comparison, at the patch's onset.
    const double copy_at_s = comparison ? from_s - static_cast<double>(comparison->align.lag_frames) / source.sample_rate_hz
                                        : p.source.onset_s;
    const render_params partials_only{.sample_rate_hz = source.sample_rate_hz, .include_noise = false};
    const std::vector<float> partials = stereo ? mean_of(render_channels(p, partials_only)) : render_patch(p, partials_only);
    std::optional<channel_comparison> channels;
    if (stereo && comparison) {
        const std::size_t from = source.samples.size() - note.size();
        try {
            channels = compare_channels(std::span<const float>(source.channels[0]).subspan(from),
                                        std::span<const float>(source.channels[1]).subspan(from), copy_channels[0],
                                        copy_channels[1], source.sample_rate_hz, *comparison, {});
        } catch (const analysis_error& e) {
            warn(source_path.string() + ": no per-channel comparison: " + e.what());
        }
    }
    std::vector<float> noise(render.size());
    for (std::size_t n = 0; n < render.size(); ++n) noise[n] = render[n] - partials[n];
    const std::vector<float> copy_in_source = placed_in_source(render, copy_at_s, source);
    const std::vector<float> partials_in_source = placed_in_source(partials, copy_at_s, source);
    report_inputs in{.title = "wane report: " + source_path.filename().string(),
                     .value = &p,
                     .tracking = tracking,
                     .spectrogram = make_spectrogram(source.samples, source.sample_rate_hz),
                     .source_audio = source.samples,
                     .source_rate_hz = source.sample_rate_hz,
                     .render_audio = render,
                     .render_rate_hz = source.sample_rate_hz,
                     .copy_in_source = copy_in_source,
                     .partials_in_source = partials_in_source,
                     .partials_audio = partials,
                     .noise_audio = noise,
                     .source_name = source_path.filename().string(),
                     .info_table = patch_info_text(p, patch_path),
                     .comparison = comparison ? &*comparison : nullptr,
                     .comparison_note = comparison_note,
                     .comparison_from_s = from_s,
                     .stereo = channels ? &*channels : nullptr,
                     .max_plot_freq_hz = top_hz};
    write_file_atomic(out_path, make_report_html(in));
}

void add_report_command(CLI::App& app, command_registry& reg) {
    auto opt = std::make_shared<report_options>();
    CLI::App* sub = app.add_subcommand(
        "report", "Write a self-contained HTML page: spectrogram with tracks, fitted envelopes, patch table, "
                  "comparison figures and audio players");
    sub->add_option("SOURCE", opt->source_path, "The recording the patch was made from")->required();
    sub->add_option("PATCH", opt->patch_path, "The patch (.toml)")->required();
    sub->add_option("-o,--output", opt->out_path, "HTML file to write")->required();
    sub->add_option("--max-input-s", opt->max_input_s, "Refuse sources longer than this, seconds (the page embeds them)")
        ->capture_default_str();
    sub->add_option("--top-hz", opt->top_hz,
                    "Top of the spectrograms in Hz (default: the source's Nyquist frequency)");
    sub->footer("Examples:\n  wane report pluck.wav pluck.toml -o pluck.html\n"
                "  wane report pluck.wav pluck.toml -o pluck.html --top-hz 8000\n"
                "  wane analyze pluck.wav -o pluck.toml --report   (writes pluck.html beside the patch)");
    reg.add(sub, [opt] {
        const std::filesystem::path inputs[] = {opt->source_path, opt->patch_path};
        refuse_overwriting_input(opt->out_path, inputs);
        const auto t0 = std::chrono::steady_clock::now();
        if (!(opt->max_input_s > 0.0 && std::isfinite(opt->max_input_s))) {
            throw usage_error("--max-input-s " + short_num(opt->max_input_s) + ": must be a positive number of seconds");
        }
        if (!(opt->top_hz >= 0.0 && std::isfinite(opt->top_hz))) {
            throw usage_error("--top-hz " + short_num(opt->top_hz) + ": must be 0 (the Nyquist frequency) or a positive frequency in Hz");
        }
        const mono_audio source = read_audio(opt->source_path, {.keep_stereo = true, .max_length_s = opt->max_input_s});
        const patch_read_result r = read_patch_file(opt->patch_path);
        warn_all(r.warnings);
        const patch& p = r.value;
        // Re-track the source with the settings the patch records, so the overlay shows what the
        // analysis saw.
        tracking_params tp;
        if (p.note.f0_hz > 0.0) tp.f0_hz = p.note.f0_hz;
        if (p.source.analysis) {
            if (p.source.analysis->window_s > 0.0) tp.window_s = p.source.analysis->window_s;
            if (p.source.analysis->fft_size > 0) tp.fft_size = p.source.analysis->fft_size;
            if (p.source.analysis->hop_s > 0.0) tp.hop_s = p.source.analysis->hop_s;
        }
        std::unique_ptr<tracking_result> tracking;
        try {
            // From just before the patch's onset, so the tracks are those of the patch's note even
            // when it was analyzed with --start-s; track times count from the onset found there.
            tracking = std::make_unique<tracking_result>(track_note(from_patch_onset(source, p), source.sample_rate_hz, tp));
        } catch (const analysis_error& e) {
            warn(opt->source_path.string() + ": no tracks drawn: " + e.what());
        }
        write_analysis_report(source, opt->source_path, p, tracking.get(), opt->patch_path, opt->out_path, opt->top_hz);
        const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
        say(opt->out_path.string() + ": report written in " + num("%.2f s", seconds) + ", " +
            std::to_string(std::filesystem::file_size(opt->out_path)) + " bytes");
        return exit_ok;
    });
}

}  // namespace wane::cli

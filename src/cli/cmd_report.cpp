// wane report SOURCE PATCH -o report.html: one self-contained HTML page showing the fit.
#include <chrono>
#include <cmath>
#include <cstdio>
#include <memory>
#include <string>

#include "cli/common.hpp"
#include "io/atomic_file.hpp"
#include "io/audio_file.hpp"
#include "io/patch_toml.hpp"
#include "measure/compare.hpp"
#include "report/report.hpp"
#include "synthesis/render.hpp"
#include "tracking/tracker.hpp"

namespace wane::cli {

namespace {

std::string num(const char* format, double v) {
    if (!std::isfinite(v)) return v > 0 ? "inf" : "-";
    char buf[64];
    std::snprintf(buf, sizeof buf, format, v);
    return buf;
}

/// The comparison rows of the report: what `wane compare SOURCE RENDER` prints, in brief.
std::vector<std::pair<std::string, std::string>> compare_rows(std::span<const float> source, std::span<const float> render,
                                                              double sample_rate_hz) {
    std::vector<std::pair<std::string, std::string>> rows;
    compare_result r;
    try {
        r = compare_signals(source, render, sample_rate_hz, {});
    } catch (const std::invalid_argument& e) {
        rows.emplace_back("comparison", std::string("not possible: ") + e.what());
        return rows;
    }
    std::string sizes;
    for (const auto& res : r.whole.per_resolution) sizes += (sizes.empty() ? "" : ", ") + std::to_string(res.fft_size);
    rows.emplace_back("log-spectral distance, whole note (STFT sizes " + sizes + ")",
                      num("%.2f dB", r.whole.log_spectral_distance_db));
    rows.emplace_back("log-spectral distance, first 100 ms", num("%.2f dB", r.early.log_spectral_distance_db));
    rows.emplace_back("spectral convergence, whole note", num("%.4f", r.whole.spectral_convergence));
    rows.emplace_back("time-domain SNR, first 100 ms", num("%.2f dB", r.early_snr_db));
    rows.emplace_back("alignment lag of the render", std::to_string(r.align.lag_frames) + " samples");
    if (r.f0_difference_cents) rows.emplace_back("f0 of render against source", num("%+.2f cents", *r.f0_difference_cents));
    for (const band_decay_pair& b : r.bands) {
        rows.emplace_back(num("T30 in the %.0f Hz octave band (source / render)", b.band.nominal_hz),
                          num("%.3f s", b.a.t30_s) + " / " + num("%.3f s", b.b.t30_s));
    }
    return rows;
}

struct report_options {
    std::filesystem::path source_path;
    std::filesystem::path patch_path;
    std::filesystem::path out_path;
};

}  // namespace

void write_analysis_report(const mono_audio& source, const std::filesystem::path& source_path, const patch& p,
                           const tracking_result* tracking, const std::filesystem::path& patch_path,
                           const std::filesystem::path& out_path) {
    const std::vector<float> render = render_patch(p, {.sample_rate_hz = source.sample_rate_hz});
    // The render starts at the onset; the source's onset is at source.onset_s.
    report_inputs in{.title = "wane report: " + source_path.filename().string(),
                     .value = &p,
                     .tracking = tracking,
                     .spectrogram = make_spectrogram(source.samples, source.sample_rate_hz),
                     .source_audio = source.samples,
                     .source_rate_hz = source.sample_rate_hz,
                     .render_audio = render,
                     .render_rate_hz = source.sample_rate_hz,
                     .info_table = patch_info_text(p, patch_path),
                     .compare_rows = compare_rows(source.samples, render, source.sample_rate_hz)};
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
    sub->footer("Examples:\n  wane report pluck.wav pluck.toml -o pluck.html\n"
                "  wane analyze pluck.wav -o pluck.toml --report   (writes pluck.html beside the patch)");
    reg.add(sub, [opt] {
        const std::filesystem::path inputs[] = {opt->source_path, opt->patch_path};
        refuse_overwriting_input(opt->out_path, inputs);
        const auto t0 = std::chrono::steady_clock::now();
        const mono_audio source = read_audio(opt->source_path);
        const patch_read_result r = read_patch_file(opt->patch_path);
        for (const std::string& w : r.warnings) warn(w);
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
            tracking = std::make_unique<tracking_result>(track_note(source.samples, source.sample_rate_hz, tp));
        } catch (const std::invalid_argument& e) {
            warn(opt->source_path.string() + ": no tracks drawn: " + e.what());
        }
        write_analysis_report(source, opt->source_path, p, tracking.get(), opt->patch_path, opt->out_path);
        const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
        say(opt->out_path.string() + ": report written in " + num("%.2f s", seconds) + ", " +
            std::to_string(std::filesystem::file_size(opt->out_path)) + " bytes");
        return exit_ok;
    });
}

}  // namespace wane::cli

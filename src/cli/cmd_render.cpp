// wane render PATCH -o OUT: audio from a patch (the oscillator bank of src/synthesis/render.hpp).
// Out-of-range option values are bad usage (exit 2, naming the option); an output that would
// exceed full scale by more than max_over_full_scale_db is a run-time error (exit 1, no file).
// Clipping is never silent: a peak over 0 dBFS
// fails with advice unless --normalize-db scales the render (and says so).
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <optional>
#include <string>
#include <vector>

#include "core/text_format.hpp"
#include "cli/common.hpp"
#include "cli/length_options.hpp"
#include "cli/loudness.hpp"
#include "cli/transform_options.hpp"
#include "synthesis/render_budget.hpp"
#include "core/patch.hpp"
#include "core/pitch_names.hpp"
#include "core/units.hpp"
#include "io/atomic_file.hpp"
#include "io/audio_file.hpp"
#include "io/patch_toml.hpp"
#include "synthesis/render.hpp"

namespace wane::cli {

namespace {

/// Largest |--gain-db|, |--noise-db| and -(--normalize-db): 120 dB spans a 24-bit file's whole
/// range and a few bits more (our choice, no source); past it the render is silence or overload.
constexpr double max_abs_gain_db = 120.0;
/// Headroom the clipping advice suggests below full scale.
constexpr double advice_headroom_db = 1.0;

struct render_options {
    std::filesystem::path patch_path;
    std::filesystem::path out_path;
    double rate_hz = default_output_rate_hz;
    std::string bits = "24";
    length_cli length;
    double gain_db = 0.0;
    std::optional<double> normalize_db;
    bool no_noise = false;
    double noise_db = 0.0;
    double max_work = max_render_partial_samples;
    transform_cli transforms;
};


const char* format_text(sample_format f) {
    switch (f) {
        case sample_format::pcm16: return "16-bit";
        case sample_format::pcm24: return "24-bit";
        case sample_format::float32: return "32-bit float";
    }
    return "?";
}

/// Checks the options before anything is read or written; returns the sample format.
sample_format check_render_options(const render_options& o) {
    const std::optional<sample_format> format = parse_sample_format(o.bits);
    if (!format) throw usage_error("--bits " + o.bits + ": must be 16, 24 or 32f");
    if (!(o.rate_hz >= min_render_rate_hz && o.rate_hz <= max_render_rate_hz) ||
        o.rate_hz != std::round(o.rate_hz)) {
        throw usage_error(printf_text("--rate %.6g: must be a whole number of Hz from %.0f to %.0f",
                                      o.rate_hz, min_render_rate_hz, max_render_rate_hz));
    }
    check_length_options(o.length);
    if (!(std::fabs(o.gain_db) <= max_abs_gain_db)) {
        throw usage_error(printf_text("--gain-db %.6g: must be within +-%.0f dB", o.gain_db, max_abs_gain_db));
    }
    if (!(std::fabs(o.noise_db) <= max_abs_gain_db)) {
        throw usage_error(printf_text("--noise-db %.6g: must be within +-%.0f dB", o.noise_db, max_abs_gain_db));
    }
    if (o.normalize_db && !(*o.normalize_db <= 0.0 && *o.normalize_db >= -max_abs_gain_db)) {
        throw usage_error(printf_text("--normalize-db %.6g: must be from -%.0f to 0 dBFS", *o.normalize_db,
                                      max_abs_gain_db));
    }
    if (!(o.max_work > 0.0 && std::isfinite(o.max_work))) {
        throw usage_error("--max-work " + short_num(o.max_work) + ": must be a positive number of partial-samples");
    }
    const std::filesystem::path inputs[] = {o.patch_path};
    refuse_overwriting_input(o.out_path, inputs);
    return *format;
}

/// Refuses a render that would clip (or peak beyond any normalizing), or scales it to
/// --normalize-db; returns the peak of y as written (amplitude).
double level_output(std::vector<float>& y, const render_options& o, const std::string& patch_name) {
    const double peak = peak_abs(y);
    refuse_too_loud(peak, patch_name);

    double out_peak = peak;
    if (o.normalize_db) {
        if (peak == 0.0) throw std::runtime_error(patch_name + ": the render is silent; nothing to normalize");
        const double target = to_amp(level_db{*o.normalize_db}).lin;
        const double scale = target / peak;
        for (float& v : y) v = static_cast<float>(static_cast<double>(v) * scale);
        out_peak = peak_abs(y);
        if (out_peak > 1.0) {  // 0 dBFS target, one float rounding over: take it back one step
            for (float& v : y) v = std::nextafter(v, 0.0F);
            out_peak = peak_abs(y);
        }
        say(printf_text("normalized: peak %s -> %s (gain %+.2f dB)", dbfs_text(peak).c_str(),
                       dbfs_text(out_peak).c_str(), to_level(amp_lin{scale}).db));
    } else if (peak > 1.0) {
        const double peak_db = to_level(amp_lin{peak}).db;
        const double advice_gain_db = o.gain_db - std::ceil((peak_db + advice_headroom_db) * 10.0) / 10.0;
        throw std::runtime_error(patch_name + ": the render would peak at " + dbfs_text(peak) +
                                 ", over full scale; use --normalize-db -1 or " +
                                 printf_text("--gain-db %.1f", advice_gain_db));
    } else if (peak == 0.0) {
        warn(patch_name + ": the render is silent");
    }
    return out_peak;
}

int run_render(const render_options& o) {
    const sample_format format = check_render_options(o);
    const transform_params tp = to_params(o.transforms);
    const patch_read_result r = read_patch_file(o.patch_path);
    warn_all(r.warnings);
    const patch p = apply_transforms_checked(r.value, tp, o.rate_hz, o.patch_path.string());
    // The noise bands' seed is the variation seed, so one --seed fixes the whole variant.
    const double length_s = chosen_length_s(p, o.length, o.patch_path.string());
    const render_params params{.sample_rate_hz = o.rate_hz, .length_s = length_s,
                               .gain_db = o.gain_db, .include_noise = !o.no_noise, .noise_gain_db = o.noise_db,
                               .noise_seed = o.transforms.seed};
    const std::string patch_name = o.patch_path.string();
    if (static_cast<double>(render_frames(p, params)) > max_length_s * o.rate_hz) {
        throw std::runtime_error(patch_name + ": render would last longer than the " +
                                 printf_text("%.0f", max_length_s) + " s limit");
    }
    check_render_budget(p, o.rate_hz, length_s, o.patch_path, o.max_work);

    const render_summary summary = summarize_render(p, params);
    if (summary.partials_above_nyquist > 0) {
        warn(printf_text("%zu of %zu partials are at or above the output Nyquist frequency (%.0f Hz) and "
                        "are left out; raise --rate to keep them",
                        summary.partials_above_nyquist, p.partials.size(), 0.5 * o.rate_hz));
    }

    // A stereo patch renders both channels (interleaved frames); the peak and --normalize-db
    // take them together, so the balance between the channels is kept.
    const std::vector<std::vector<float>> channels = render_channels(p, params);
    std::vector<float> y = channels.size() == 1 ? channels[0] : interleave(channels);
    const double out_peak = level_output(y, o, patch_name);

    audio_write_options wopts{.format = format, .channels = static_cast<int>(channels.size())};
    if (const double root = root_hz(p.note); root > 0.0) {
        const double midi = std::round(hz_to_midi(root));
        if (midi >= 0.0 && midi <= 127.0) wopts.root_midi = static_cast<int>(midi);
    }
    write_audio(o.out_path, y, o.rate_hz, wopts);

    std::string partials = printf_text("%zu partials", summary.partials_rendered);
    if (summary.partials_faded > 0) partials += printf_text(", %zu faded near Nyquist", summary.partials_faded);
    if (summary.partials_above_nyquist > 0) {
        partials += printf_text(", %zu above Nyquist left out", summary.partials_above_nyquist);
    }
    const std::size_t frames = y.size() / channels.size();  // interleaved samples -> frames
    say(printf_text("%s: %.3f s at %.0f Hz%s, %s, %s, peak %s", o.out_path.string().c_str(),
                   static_cast<double>(frames) / o.rate_hz, o.rate_hz,
                   channels.size() == 2 ? " stereo" : "", format_text(format),
                   partials.c_str(), dbfs_text(out_peak).c_str()));
    return exit_ok;
}

}  // namespace

void add_render_command(CLI::App& app, command_registry& reg) {
    CLI::App* sub = app.add_subcommand("render", "Render audio from a patch (oscillator bank of damped partials)");
    static render_options o;
    sub->add_option("PATCH", o.patch_path, "Patch file (.toml) to render")->required();
    sub->add_option("-o,--output", o.out_path, "Audio file to write (.wav, .aif/.aiff, .flac)")->required();
    sub->add_option("--rate", o.rate_hz, "Output sample rate in Hz, 8000 to 192000")->default_val(default_output_rate_hz);
    sub->add_option("--bits", o.bits, "Sample format: 16 (with TPDF dither), 24 or 32f")->default_val("24");
    add_length_options(sub, o.length);
    sub->add_option("--gain-db", o.gain_db, "Gain in dB, added to the patch's note.gain_db")->default_val(0.0);
    sub->add_option("--normalize-db", o.normalize_db,
                    "Scale the render so its peak is at this level in dBFS (at most 0), e.g. -1");
    sub->add_flag("--no-noise", o.no_noise, "Leave the noise bands ([[noise]]) out: partials only");
    sub->add_option("--noise-db", o.noise_db, "Gain of the noise bands in dB, on top of --gain-db")->default_val(0.0);
    sub->add_option("--max-work", o.max_work,
                    "Refuse renders costing more than this many partial-samples ((partials + 4 x noise bands) x "
                    "frames; 1e11 is about 17 s of one core)")
        ->default_val(max_render_partial_samples);
    add_transform_options(sub, o.transforms);
    sub->footer(
        "The end of every render fades out over 10 ms (raised cosine). A peak over 0 dBFS is an error\n"
        "unless --normalize-db is given; one more than 40 dB over full scale is always an error.\n"
        "Examples:\n"
        "  wane render patches/steel-pluck.toml -o pluck.wav\n"
        "  wane render note.toml -o note-44k.wav --rate 44100 --bits 16 --normalize-db -1\n"
        "  wane render note.toml -o tail.wav --until-db -90\n"
        "  wane render note.toml -o fifth-up.wav --transpose 7 --decay-follows-pitch");
    reg.add(sub, [] { return run_render(o); });
}

}  // namespace wane::cli

// wane analyze IN... -o OUT: recordings -> patches. One input writes the patch file OUT; several
// write OUT/<stem>.toml each, files processed in parallel (a pool of std::threads over the files).
// A file that fails is reported on one line and skipped; the exit code is 1 if any failed.
#include <algorithm>
#include <atomic>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <map>
#include <mutex>
#include <optional>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include "analysis/analyze.hpp"
#include "analysis/stereo_place.hpp"
#include "cli/common.hpp"
#include "core/patch.hpp"
#include "io/atomic_file.hpp"
#include "io/audio_file.hpp"
#include "io/errors.hpp"
#include "io/patch_checksum.hpp"
#include "io/patch_toml.hpp"
#include "platform/progress.hpp"

namespace wane::cli {

namespace {

namespace fs = std::filesystem;

/// Bounds of the options (validated before any work).
constexpr double max_f0_hz = 20000.0;
constexpr int min_fft_size = 16;
constexpr int max_analysis_fft_size = 1 << 20;
constexpr double max_window_s = 10.0;
constexpr int max_jobs = 256;
constexpr const char* patch_extension = ".toml";

struct analyze_options {
    std::vector<std::string> inputs;
    std::string output;
    std::optional<double> f0_hz;
    int max_partials = tracking_params{}.max_partials;
    int max_segments = analysis_params{}.max_segments;
    double start_s = 0.0;
    std::optional<double> end_s;
    std::optional<int> channel;
    bool mono = false;
    std::optional<double> window_s;
    std::optional<int> fft_size;
    std::optional<double> hop_s;
    std::optional<std::string> name;
    std::optional<int> jobs;
    bool report = false;
    bool overwrite_edited = false;
    double max_report_s = max_report_input_s();
    bool no_noise = false;
    bool no_onset_refine = false;
    bool no_long_spectrum = false;
    bool split_pairs = false;
    double cut_fade_lengths = cut_tail_params{}.fade_lengths;
    double max_input_s = default_max_input_s;
    std::uintmax_t max_input_mib = default_max_input_bytes >> 20;
};

std::string num(double v) {
    std::ostringstream os;
    os << v;
    return os.str();
}

void validate(const analyze_options& o) {
    if (!(o.cut_fade_lengths >= 0.0 && o.cut_fade_lengths <= 1000.0))
        throw usage_error("--cut-fade-lengths " + num(o.cut_fade_lengths) +
                          ": must be 0 (keep the recording's late slopes) to 1000 recorded lengths");
    if (!(o.max_input_s > 0.0 && std::isfinite(o.max_input_s)))
        throw usage_error("--max-input-s " + num(o.max_input_s) + ": must be a positive number of seconds");
    if (o.max_input_mib == 0 || o.max_input_mib > (std::uintmax_t{1} << 40))
        throw usage_error("--max-input-mib " + std::to_string(o.max_input_mib) + ": must be 1 to 2^40 MiB");
    if (o.f0_hz && !(*o.f0_hz > 0.0 && *o.f0_hz <= max_f0_hz))
        throw usage_error("--f0 " + num(*o.f0_hz) + ": must be above 0 and at most " + num(max_f0_hz) + " Hz");
    if (o.max_partials < 1 || o.max_partials > static_cast<int>(max_partials))
        throw usage_error("--max-partials " + std::to_string(o.max_partials) + ": must be 1.." +
                          std::to_string(max_partials));
    if (o.max_segments < 1 || o.max_segments > max_fit_decay_segments)
        throw usage_error("--max-segments " + std::to_string(o.max_segments) + ": must be 1.." +
                          std::to_string(max_fit_decay_segments));
    if (!(o.start_s >= 0.0 && std::isfinite(o.start_s)))
        throw usage_error("--start-s " + num(o.start_s) + ": must be 0 or more");
    if (o.end_s && !(*o.end_s > o.start_s))
        throw usage_error("--end-s " + num(*o.end_s) + ": must be after --start-s (" + num(o.start_s) + ")");
    if (o.channel && *o.channel < 1) throw usage_error("--channel " + std::to_string(*o.channel) + ": channels count from 1");
    if (o.channel && o.mono) throw usage_error("--channel and --mono: give one (--channel takes one channel, --mono mixes them)");
    if (o.window_s && !(*o.window_s > 0.0 && *o.window_s <= max_window_s))
        throw usage_error("--window-s " + num(*o.window_s) + ": must be above 0 and at most " + num(max_window_s) + " s");
    if (o.fft_size) {
        const int n = *o.fft_size;
        if (n < min_fft_size || n > max_analysis_fft_size || n % 2 != 0)
            throw usage_error("--fft-size " + std::to_string(n) + ": must be even, from " +
                              std::to_string(min_fft_size) + " to " + std::to_string(max_analysis_fft_size));
    }
    if (o.hop_s && !(*o.hop_s > 0.0 && *o.hop_s <= max_window_s))
        throw usage_error("--hop-s " + num(*o.hop_s) + ": must be above 0 and at most " + num(max_window_s) + " s");
    if (o.window_s && o.hop_s && *o.hop_s > *o.window_s)
        throw usage_error("--hop-s " + num(*o.hop_s) + ": must not exceed --window-s " + num(*o.window_s));
    if (o.jobs && (*o.jobs < 1 || *o.jobs > max_jobs))
        throw usage_error("--jobs " + std::to_string(*o.jobs) + ": must be 1.." + std::to_string(max_jobs));
    if (!(o.max_report_s > 0.0 && std::isfinite(o.max_report_s)))
        throw usage_error("--max-report-s " + num(o.max_report_s) + ": must be a positive number of seconds");
    if (o.name && o.inputs.size() > 1) throw usage_error("--name applies to one input only (several given)");
}

struct job {
    fs::path input;
    fs::path output;
};

/// Where --report writes the report of a patch: beside it, extension .html.
fs::path report_path_of(const fs::path& patch_path) {
    fs::path html = patch_path;
    html.replace_extension(".html");
    return html;
}

/// Output path of each input: OUT itself for one input (OUT/<stem>.toml when OUT is a folder),
/// OUT/<stem>.toml for several (OUT is created when missing; its parent must exist).
std::vector<job> plan_jobs(const analyze_options& o) {
    const fs::path out(o.output);
    std::vector<fs::path> inputs(o.inputs.begin(), o.inputs.end());
    std::vector<job> jobs;
    std::error_code ec;
    const bool out_is_dir = fs::is_directory(out, ec);
    if (inputs.size() == 1 && !out_is_dir) {
        jobs.push_back({inputs[0], out});
    } else {
        if (!out_is_dir) {
            if (fs::exists(out, ec)) throw io_error(out.string() + ": several inputs need an output folder, this is a file");
            const fs::path parent = out.has_parent_path() ? out.parent_path() : fs::path(".");
            if (!fs::is_directory(parent, ec))
                throw io_error(out.string() + ": output folder's parent '" + parent.string() + "' does not exist");
        }
        std::map<std::string, fs::path> seen;
        for (const fs::path& in : inputs) {
            const std::string stem = in.stem().string();
            if (auto it = seen.find(stem); it != seen.end())
                throw usage_error("inputs '" + it->second.string() + "' and '" + in.string() + "' would both write " +
                                  (out / (stem + patch_extension)).string());
            seen.emplace(stem, in);
            jobs.push_back({in, out / (stem + patch_extension)});
        }
        if (!out_is_dir) {
            fs::create_directory(out, ec);
            if (ec) throw io_error(out.string() + ": cannot create the output folder: " + ec.message());
        }
    }
    for (const job& j : jobs) {
        refuse_overwriting_input(j.output, inputs);
        refuse_overwriting_edited_patch(j.output, o.overwrite_edited, "--overwrite-edited");
        if (o.report) {  // the report beside the patch is an output too
            const fs::path html = report_path_of(j.output);
            refuse_overwriting_input(html, inputs);
            const fs::path patch_path[] = {j.output};
            if (html == j.output) throw io_error(html.string() + ": the report would overwrite the patch; name the patch .toml");
            refuse_overwriting_input(html, patch_path);
        }
    }
    return jobs;
}

/// Removes a DC offset within dc_offset_range_db of the peak (analysis/analyze.hpp) from the
/// analyzed signal and from each kept channel (the mix of two channels loses its mean when either
/// channel did); returns the offset removed from the analyzed signal, full scale (0: none).
double remove_dc_offsets(mono_audio& audio) {
    bool channel_offset = false;
    for (std::vector<float>& c : audio.channels) {
        if (!has_dc_offset(c)) continue;
        remove_mean(c);
        channel_offset = true;
    }
    return channel_offset || has_dc_offset(audio.samples) ? remove_mean(audio.samples) : 0.0;
}

std::string summary_line(const job& j, const analysis_summary& s, std::uintmax_t bytes, double dc_removed) {
    char buf[192];
    // How the recording ends comes first; the line ends with the patch size.
    std::string end;
    if (dc_removed != 0.0) {
        std::snprintf(buf, sizeof buf, " a DC offset of %+.4f of full scale removed;", dc_removed);
        end = buf;
    }
    if (s.unanalysed_s > 0.0) {
        std::snprintf(buf, sizeof buf, " the first %.0f s analyzed (what a patch holds), the last %.2f s left out;",
                      max_length_s, s.unanalysed_s);
        end += buf;
    }
    if (s.end.kind == end_kind::cut) {
        std::snprintf(buf, sizeof buf,
                      " cut at %.3f s while sounding (%.1f dB under the peak, %d decays run on past it, %d faded past it);",
                      s.end.length_s, s.end.end_below_peak_db, s.continued_past_cut, s.faded_past_cut);
        end += buf;
    } else if (s.end.kind == end_kind::holds) {
        std::snprintf(buf, sizeof buf, " holds its level for the last %.2f s;", s.end.held_s);
        end += buf;
    }
    std::snprintf(buf, sizeof buf, " %d partials, %d short-lived, %d pairs split, onset fit explains %.1f dB, %d segments, fit error %.2f dB, %ju bytes",
                  s.partials, s.new_modes, s.pairs_split, s.onset_explained_db, s.segments, s.fit_error_db, bytes);
    return j.input.string() + " -> " + j.output.string() + ":" + end + buf;
}

/// Analyzes one file and writes its patch; returns the summary line. Throws with a message that
/// names the file.
std::string run_one(const job& j, const analyze_options& o) {
    mono_audio audio = read_audio(j.input, {.channel = o.channel, .keep_stereo = !o.mono, .max_length_s = o.max_input_s,
                                                  .max_file_bytes = o.max_input_mib << 20});
    // Two channels are kept, one is analyzed as it is; more must be chosen from or mixed.
    if (audio.source_channels > 2 && !o.channel && !o.mono) {
        throw io_error(j.input.string() + ": has " + std::to_string(audio.source_channels) +
                       " channels; choose one with --channel N (1 to " + std::to_string(audio.source_channels) +
                       ") or mix them all with --mono");
    }
    const double dc_removed = remove_dc_offsets(audio);
    analysis_params ap{.tracking = {.f0_hz = o.f0_hz, .window_s = o.window_s, .fft_size = o.fft_size,
                                    .hop_s = o.hop_s, .max_partials = o.max_partials},
                       .max_segments = o.max_segments,
                       .start_s = o.start_s,
                       .end_s = o.end_s.value_or(0.0),
                       .source_file = j.input.filename().string(),
                       .note_name = o.name.value_or(j.input.stem().string()),
                       .noise_model = !o.no_noise,
                       .refine_onset = !o.no_onset_refine,
                       .split_pairs = o.split_pairs,
                       .long_spectrum = !o.no_long_spectrum};
    ap.cut_tail.fade_lengths = o.cut_fade_lengths;
    if (o.f0_hz && *o.f0_hz >= 0.5 * audio.sample_rate_hz)
        throw io_error(j.input.string() + ": --f0 " + num(*o.f0_hz) + " Hz is not below half the sample rate (" +
                       num(audio.sample_rate_hz) + " Hz)");
    analysis_result r;
    try {
        r = audio.channels.size() == 2
                ? analyze_stereo_note(audio.samples, audio.channels[0], audio.channels[1], audio.sample_rate_hz, ap, {})
                : analyze_note(audio.samples, audio.sample_rate_hz, ap);
    } catch (const analysis_error& e) {
        throw io_error(j.input.string() + ": " + e.what());
    }
    try {
        write_file_atomic(j.output, with_checksum(format_patch(r.value)));
    } catch (const patch_error& e) {
        throw io_error(j.input.string() + " -> " + j.output.string() + ": " + e.what());
    }
    std::error_code ec;
    const std::uintmax_t bytes = fs::file_size(j.output, ec);
    std::string line = summary_line(j, r.summary, ec ? 0 : bytes, dc_removed);
    if (o.report) {
        const fs::path html = report_path_of(j.output);
        const double length_s = static_cast<double>(audio.samples.size()) / audio.sample_rate_hz;
        if (length_s > o.max_report_s) {
            throw io_error(j.input.string() + ": patch " + j.output.string() + " written, but no report: " +
                           short_num(length_s) + " s is longer than the " + short_num(o.max_report_s) +
                           " s a report draws (raise it with --max-report-s)");
        }
        write_analysis_report(audio, j.input, r.value, &r.tracking, j.output, html);
        line += "; report " + html.string();
    }
    return line;
}

int run(const analyze_options& o) {
    validate(o);
    const std::vector<job> jobs = plan_jobs(o);
    const unsigned hw = std::max(1u, std::thread::hardware_concurrency());
    const std::size_t threads =
        std::min<std::size_t>(jobs.size(), o.jobs ? static_cast<std::size_t>(*o.jobs) : hw);
    progress_bar bar("analyze", jobs.size(), globals().quiet || jobs.size() < 2);
    std::atomic<std::size_t> next{0};
    std::atomic<int> failed{0};
    std::mutex out_mutex;
    auto worker = [&] {
        for (std::size_t i = next++; i < jobs.size(); i = next++) {
            try {
                const std::string line = run_one(jobs[i], o);
                std::lock_guard lock(out_mutex);
                say(line);
            } catch (const std::exception& e) {
                ++failed;
                // Every error names the input (most already start with it).
                const std::string what = e.what();
                const std::string input = jobs[i].input.string();
                std::lock_guard lock(out_mutex);
                std::string message;
                if (what.find(input) == std::string::npos) message.append(input).append(": ");
                message.append(what);
                print_error(message);
            }
            bar.advance();
        }
    };
    std::vector<std::thread> pool;
    for (std::size_t t = 1; t < threads; ++t) pool.emplace_back(worker);
    worker();
    for (std::thread& t : pool) t.join();
    bar.finish();
    return failed > 0 ? exit_failure : exit_ok;
}

}  // namespace

void add_analyze_command(CLI::App& app, command_registry& reg) {
    auto o = std::make_shared<analyze_options>();
    CLI::App* sub = app.add_subcommand("analyze", "Analyze recorded notes into patches of damped partials");
    sub->add_option("inputs", o->inputs, "Audio files (WAV, AIFF, FLAC, ...)")->required();
    sub->add_option("-o,--output", o->output,
                    "Patch file for one input; folder for several (one <stem>.toml each)")
        ->required();
    sub->add_option("--f0", o->f0_hz, "Hint of the fundamental in Hz: numbers the harmonics and starts the series fit; the partials found are the same as without it");
    sub->add_option("--max-partials", o->max_partials, "Keep at most this many partials, strongest first; past the 80 strongest only those within 60 dB of the strongest")
        ->capture_default_str();
    sub->add_option("--max-segments", o->max_segments, "Decay segments per partial, at most")->capture_default_str();
    sub->add_option("--start-s", o->start_s, "Analyze from this time in the file, seconds")->capture_default_str();
    sub->add_option("--end-s", o->end_s, "Analyze up to this time in the file, seconds (default: the end)");
    sub->add_option("--channel", o->channel,
                    "Take this channel (from 1; default: a stereo patch from two channels; more need this or --mono)");
    sub->add_flag("--mono", o->mono, "Mix all channels to mono (a mono patch from a stereo file)");
    sub->add_option("--window-s", o->window_s, "STFT window length, seconds (default: from the sound)");
    sub->add_option("--fft-size", o->fft_size, "FFT size in samples, even, at least the window (default: from the window)");
    sub->add_option("--hop-s", o->hop_s, "STFT hop, seconds (default: from the window)");
    sub->add_option("--name", o->name, "Note name in the patch (default: the file's stem; one input only)");
    sub->add_option("-j,--jobs", o->jobs, "Files analyzed at once (default: all cores)");
    sub->add_flag("--report", o->report, "Also write an HTML report beside each patch (<stem>.html)");
    sub->add_flag("--overwrite-edited", o->overwrite_edited,
                  "Replace an existing patch even if it was edited since wane wrote it (or not written by wane)");
    sub->add_option("--max-report-s", o->max_report_s, "With --report: no report for inputs longer than this, seconds")
        ->capture_default_str();
    sub->add_flag("--no-noise", o->no_noise, "Fit partials only: no [[noise]] bands for the residual");
    sub->add_flag("--no-onset-refine", o->no_onset_refine,
                  "Keep the STFT envelopes' starts: no waveform fit of the onset, no short-lived modes");
    sub->add_flag("--no-long-spectrum", o->no_long_spectrum,
                  "Keep the tracks' own partial frequencies: no move to the peaks of a 1 s FFT of the "
                  "recording, no partials added for its strong peaks the tracks missed");
    sub->add_flag("--split-pairs", o->split_pairs,
                  "Split a partial that beats into two close partials, each with its own decay");
    sub->add_option("--cut-fade-lengths", o->cut_fade_lengths,
                    "For a recording cut while the note sounds: past the cut no partial or band keeps a T60 "
                    "longer than this many times the recorded length (0 keeps the slopes the recording shows "
                    "at its end)")
        ->capture_default_str();
    sub->add_option("--max-input-s", o->max_input_s, "Refuse input files longer than this, seconds")
        ->capture_default_str();
    sub->add_option("--max-input-mib", o->max_input_mib, "Refuse input files larger than this, MiB")
        ->capture_default_str();
    sub->footer("Examples:\n  wane analyze pluck.wav -o pluck.toml\n"
                "  wane analyze notes/*.wav -o patches --max-segments 2");
    reg.add(sub, [o] { return run(*o); });
}

}  // namespace wane::cli

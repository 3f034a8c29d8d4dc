// wane compare A B: how far a copy (B) is from its source (A). Aligns B to A at the onset, then
// prints the multi-resolution log-spectral distance, spectral convergence, octave-band T20/T30 of
// both and the SNR over the first 100 ms after the onset, as a table or as JSON.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <iostream>
#include <memory>
#include <optional>
#include <sstream>
#include <stdexcept>
#include <string>

#include "core/text_format.hpp"
#include "cli/common.hpp"
#include "cli/compare_stereo.hpp"
#include "io/audio_file.hpp"
#include "measure/compare.hpp"
#include "measure/fidelity.hpp"

namespace wane::cli {

namespace {

/// Fraction of a lower-rate B's Nyquist frequency kept in the spectral distances (common
/// practice, no source: leaves out the resampler's transition band).
constexpr double resampled_band_fraction = 0.95;

struct compare_options {
    std::filesystem::path a_path;
    std::filesystem::path b_path;
    bool json = false;
    double early_s = 0.100;
};

/// printf-style formatting of one number; non-finite values as `nan_text`.
std::string num(double v, const char* fmt, const char* nan_text) {
    if (!std::isfinite(v)) return nan_text;
    return printf_text(fmt, v);
}

/// A JSON number (17 significant digits is more than the measures carry; 6 is plenty), or null.
std::string jnum(double v) { return num(v, "%.6g", "null"); }

std::string json_string(const std::string& s) {
    std::string out = "\"";
    for (const char c : s) {
        switch (c) {
            case '"': out += "\\\""; break;
            case '\\': out += "\\\\"; break;
            case '\n': out += "\\n"; break;
            case '\t': out += "\\t"; break;
            default:
                if (static_cast<unsigned char>(c) < 0x20) {
                    char buf[8];
                    std::snprintf(buf, sizeof buf, "\\u%04x", static_cast<unsigned>(c));
                    out += buf;
                } else {
                    out += c;
                }
        }
    }
    return out + "\"";
}

std::string json_distance(const spectral_distance_result& d) {
    std::ostringstream o;
    o << "{\"log_spectral_distance_db\": " << jnum(d.log_spectral_distance_db)
      << ", \"spectral_convergence\": " << jnum(d.spectral_convergence) << ", \"per_resolution\": [";
    for (std::size_t i = 0; i < d.per_resolution.size(); ++i) {
        const resolution_distance& r = d.per_resolution[i];
        o << (i ? ", " : "") << "{\"fft_size\": " << r.fft_size << ", \"hop_frames\": " << r.hop_frames
          << ", \"stft_frames\": " << r.stft_frames << ", \"bins_used\": " << r.bins_used
          << ", \"log_spectral_distance_db\": " << jnum(r.log_spectral_distance_db)
          << ", \"spectral_convergence\": " << jnum(r.spectral_convergence) << "}";
    }
    o << "]}";
    return o.str();
}

std::string json_decay(const decay_times& d) {
    std::ostringstream o;
    // t20_s / t30_s only when the ISO 3382-1 noise margin is met; *_fit_s whenever the curve
    // reaches the range (the margin unchecked).
    o << "{\"t20_s\": " << jnum(d.t20_s) << ", \"t30_s\": " << jnum(d.t30_s)
      << ", \"t20_fit_s\": " << jnum(d.t20_fit.t60_s) << ", \"t30_fit_s\": " << jnum(d.t30_fit.t60_s)
      << ", \"dynamic_range_db\": " << jnum(d.dynamic_range_db) << "}";
    return o.str();
}

void print_json(const compare_options& opt, const compare_result& r, const spectral_distance_params& sp,
                std::optional<double> b_rate_before_hz, const std::string& stereo) {
    std::ostringstream o;
    o << "{\n";
    o << "  \"a\": " << json_string(opt.a_path.string()) << ",\n";
    o << "  \"b\": " << json_string(opt.b_path.string()) << ",\n";
    o << "  \"sample_rate_hz\": " << jnum(r.sample_rate_hz) << ",\n";
    o << "  \"b_resampled_from_hz\": " << (b_rate_before_hz ? jnum(*b_rate_before_hz) : "null") << ",\n";
    o << "  \"alignment\": {\"lag_frames\": " << r.align.lag_frames
      << ", \"lag_s\": " << jnum(static_cast<double>(r.align.lag_frames) / r.sample_rate_hz)
      << ", \"waveform_correlation\": " << jnum(r.align.waveform_correlation)
      << ", \"onset_a_s\": " << jnum(static_cast<double>(r.align.onset_a_frames) / r.sample_rate_hz) << "},\n";
    o << "  \"stft\": {\"window\": \"hann\", \"fft_sizes\": [";
    for (std::size_t i = 0; i < sp.fft_sizes.size(); ++i) o << (i ? ", " : "") << sp.fft_sizes[i];
    o << "], \"hop\": \"size/" << sp.hop_divisor << "\", \"range_db\": " << jnum(sp.range_db)
      << ", \"max_freq_hz\": " << jnum(r.spectral_max_freq_hz) << "},\n";
    o << "  \"whole\": " << json_distance(r.whole) << ",\n";
    o << "  \"early_window_s\": " << jnum(r.early_window_s) << ",\n";
    o << "  \"early\": " << json_distance(r.early) << ",\n";
    // +inf (identical in the window) has no JSON number: null, with the flag saying why.
    o << "  \"early_snr_db\": " << jnum(r.early_snr_db) << ",\n";
    o << "  \"early_identical\": " << (std::isinf(r.early_snr_db) && r.early_snr_db > 0 ? "true" : "false") << ",\n";
    if (r.f0_difference_cents) o << "  \"f0_difference_cents\": " << jnum(*r.f0_difference_cents) << ",\n";
    if (r.tuning_difference_cents) {
        o << "  \"tuning_difference_cents\": " << jnum(*r.tuning_difference_cents) << ",\n";
        o << "  \"tuning_partials\": " << r.tuning_pairs << ",\n";
    }
    o << "  \"headline\": " << json_string(fidelity_headline(r)) << ",\n";
    o << "  \"differences\": [";
    for (std::size_t i = 0; i < r.remarks.sentences.size(); ++i) {
        o << (i ? ", " : "") << json_string(r.remarks.sentences[i]);
    }
    o << "],\n";
    o << "  \"onset_rise_s\": {\"a\": " << jnum(r.remarks.rise_a_s) << ", \"b\": " << jnum(r.remarks.rise_b_s) << "},\n";
    o << "  \"octave_bands\": [";
    for (std::size_t i = 0; i < r.bands.size(); ++i) {
        const band_decay_pair& b = r.bands[i];
        o << (i ? ",\n    " : "\n    ") << "{\"nominal_hz\": " << jnum(b.band.nominal_hz)
          << ", \"low_hz\": " << jnum(b.band.lower_edge_hz) << ", \"high_hz\": " << jnum(b.band.upper_edge_hz)
          << ", \"a\": " << json_decay(b.a) << ", \"b\": " << json_decay(b.b) << "}";
    }
    o << "\n  ]";
    if (!stereo.empty()) o << ",\n  \"stereo\": " << stereo;
    o << "\n}\n";
    std::cout << o.str();
}

void print_table(const compare_options& opt, const compare_result& r, const spectral_distance_params& sp,
                 std::optional<double> b_rate_before_hz) {
    std::ostringstream o;
    const double fs = r.sample_rate_hz;
    o << "A: " << opt.a_path.string() << "\nB: " << opt.b_path.string() << "\n";
    o << "rate " << num(fs, "%.0f", "?") << " Hz";
    if (b_rate_before_hz) o << " (B resampled from " << num(*b_rate_before_hz, "%.0f", "?") << " Hz)";
    o << "\n";
    o << "alignment: B lags A by " << r.align.lag_frames << " samples ("
      << num(1000.0 * static_cast<double>(r.align.lag_frames) / fs, "%.3f", "?") << " ms), waveform correlation "
      << num(r.align.waveform_correlation, "%.4f", "-") << "; onset of A at "
      << num(static_cast<double>(r.align.onset_a_frames) / fs, "%.3f", "?") << " s\n\n";
    o << fidelity_headline(r) << "\n";
    if (r.remarks.sentences.empty()) o << "differences: none of the checked kinds (see --help)\n";
    else o << "differences, largest first:\n";
    for (const std::string& s : r.remarks.sentences) o << "  - " << s << "\n";
    o << "\n";

    const std::string early_label = "first " + num(1000.0 * r.early_window_s, "%.0f", "?") + " ms";
    o << "spectral distances (STFT, Hann window, hop = size/" << sp.hop_divisor
      << "; log-spectral distance over bins within " << num(sp.range_db, "%.0f", "?") << " dB of A's peak";
    if (r.spectral_max_freq_hz < 0.5 * fs) o << "; bins up to " << num(r.spectral_max_freq_hz, "%.0f", "?") << " Hz";
    o << ")\n";
    char size_head[40];
    std::snprintf(size_head, sizeof size_head, "  %-27s", "STFT size");
    o << size_head;
    for (const int n : sp.fft_sizes) o << num(static_cast<double>(n), "%9.0f", "");
    o << "     mean\n";
    auto row = [&](const std::string& label, const spectral_distance_result& d, bool lsd) {
        char head[48];
        std::snprintf(head, sizeof head, "  %-27s", label.c_str());
        o << head;
        for (const resolution_distance& res : d.per_resolution) {
            o << num(lsd ? res.log_spectral_distance_db : res.spectral_convergence, lsd ? "%9.3f" : "%9.4f", "        -");
        }
        o << num(lsd ? d.log_spectral_distance_db : d.spectral_convergence, lsd ? "%9.3f" : "%9.4f", "        -") << "\n";
    };
    row("LSD dB, whole", r.whole, true);
    row("LSD dB, " + early_label, r.early, true);
    row("convergence, whole", r.whole, false);
    row("convergence, " + early_label, r.early, false);
    o << "\nSNR over the " << early_label << " after onset: ";
    if (std::isinf(r.early_snr_db) && r.early_snr_db > 0) {
        o << "identical (no difference)\n";
    } else {
        o << num(r.early_snr_db, "%.2f dB", "not measurable (silent)") << "\n";
    }
    if (r.f0_difference_cents) o << "f0 of B against A: " << num(*r.f0_difference_cents, "%+.2f", "?") << " cents\n";
    if (r.tuning_difference_cents) {
        o << "tuning of B against A: " << num(*r.tuning_difference_cents, "%+.2f", "?") << " cents (median of the "
          << r.tuning_pairs << " strongest partials of A paired with B's)\n";
    }

    o << "\noctave-band decay times from A's onset, in s (Schroeder integration; T20 fits -5..-25 dB,\n"
         "T30 -5..-35 dB, by least squares, extrapolated to 60 dB; (x) = less than 10 dB between the\n"
         "range and the noise or the end of the file, so not an ISO 3382-1 figure; - = range not reached)\n";
    o << "  band Hz      T20 A     T20 B     T30 A     T30 B\n";
    // The ISO figure, else the fit in parentheses, else "-".
    auto decay_cell = [](double iso_s, double fit_s) {
        if (std::isfinite(iso_s)) return num(iso_s, "%.3f ", "-");
        return num(fit_s, "(%.3f)", "-    ");
    };
    for (const band_decay_pair& b : r.bands) {
        char line[128];
        std::snprintf(line, sizeof line, "  %7.0f  %9s %9s %9s %9s\n", b.band.nominal_hz,
                      decay_cell(b.a.t20_s, b.a.t20_fit.t60_s).c_str(), decay_cell(b.b.t20_s, b.b.t20_fit.t60_s).c_str(),
                      decay_cell(b.a.t30_s, b.a.t30_fit.t60_s).c_str(), decay_cell(b.b.t30_s, b.b.t30_fit.t60_s).c_str());
        o << line;
    }
    std::cout << o.str();
}

int run_compare(const compare_options& opt) {
    if (!(opt.early_s > 0.0) || !std::isfinite(opt.early_s)) {
        throw usage_error("--early-s " + short_num(opt.early_s) + ": must be a positive number of seconds");
    }
    const mono_audio a = read_audio(opt.a_path, {.keep_stereo = true});
    mono_audio b = read_audio(opt.b_path, {.keep_stereo = true});
    std::optional<double> b_rate_before_hz;
    if (b.sample_rate_hz != a.sample_rate_hz) {
        b_rate_before_hz = b.sample_rate_hz;
        try {
            b.samples = resample(b.samples, b.sample_rate_hz, a.sample_rate_hz);
            for (std::vector<float>& c : b.channels) c = resample(c, b.sample_rate_hz, a.sample_rate_hz);
        } catch (const std::exception& e) {
            throw std::runtime_error(opt.b_path.string() + ": cannot resample from " + short_num(b.sample_rate_hz) +
                                     " Hz to the rate of " + opt.a_path.string() + " (" +
                                     short_num(a.sample_rate_hz) + " Hz): " + e.what());
        }
        b.sample_rate_hz = a.sample_rate_hz;
    }
    compare_params params{};
    params.early_window_s = opt.early_s;
    if (b_rate_before_hz) {
        // A resampled B holds nothing above the lower of the two Nyquist frequencies, nor much of
        // the resampler's transition band just below it: the spectral distances stop below that.
        params.spectral_max_freq_hz = resampled_band_fraction * 0.5 * std::min(*b_rate_before_hz, a.sample_rate_hz);
    }
    compare_result r;
    try {
        r = compare_signals(a.samples, b.samples, a.sample_rate_hz, params);
    } catch (const analysis_error& e) {
        throw std::runtime_error(opt.a_path.string() + ": " + e.what());
    }
    if (r.early_window_s < opt.early_s) {
        warn(opt.a_path.string() + " ends " + num(1000.0 * r.early_window_s, "%.1f", "?") +
             " ms after its onset: the early figures cover only that");
    }
    // Two stereo files: each channel against its own, and the figures between the channels.
    std::optional<stereo_compare> stereo;
    if (a.channels.size() == 2 && b.channels.size() == 2) {
        try {
            stereo = compare_stereo(a, b, r, params);
        } catch (const analysis_error& e) {
            throw std::runtime_error(opt.a_path.string() + ": one channel: " + e.what());
        }
    }
    if (opt.json) {
        print_json(opt, r, params.spectral, b_rate_before_hz, stereo ? stereo_json(*stereo) : std::string());
    } else {
        print_table(opt, r, params.spectral, b_rate_before_hz);
        if (stereo) std::cout << stereo_table(*stereo);
    }
    return exit_ok;
}

}  // namespace

void add_compare_command(CLI::App& app, command_registry& reg) {
    auto opt = std::make_shared<compare_options>();
    CLI::App* sub = app.add_subcommand(
        "compare", "Compare a copy with its source: spectral distances, octave-band decay times, early SNR");
    sub->add_option("A", opt->a_path, "Reference recording (the source)")->required();
    sub->add_option("B", opt->b_path, "Recording to compare (e.g. a render); resampled to A's rate if needed")
        ->required();
    sub->add_flag("--json", opt->json, "Print the figures as JSON instead of a table");
    sub->add_option("--early-s", opt->early_s, "Length of the early window after the onset, in s (default 0.1)");
    std::string footer = "Figures (A = the recording, B = the copy):\n";
    for (const auto& [name, definition] : figure_definitions()) footer.append("  ").append(name).append(": ").append(definition).append(".\n");
    footer += "\nExamples:\n  wane compare note.wav copy.wav\n  wane compare note.wav copy.wav --json > figures.json";
    sub->footer(footer);
    reg.add(sub, [opt] { return run_compare(*opt); });
}

}  // namespace wane::cli

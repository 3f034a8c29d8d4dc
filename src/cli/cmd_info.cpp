// wane info PATCH: what a patch holds, readable at 100 columns: the note summary and a table of
// partials (and noise bands) with each envelope's segments.
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <iostream>
#include <sstream>
#include <string>
#include <vector>

#include "core/text_format.hpp"
#include "cli/common.hpp"
#include "core/harmonics.hpp"
#include "core/patch.hpp"
#include "core/pitch_names.hpp"
#include "core/stereo.hpp"
#include "core/units.hpp"
#include "io/patch_toml.hpp"

namespace wane::cli {

namespace {

constexpr std::size_t table_width_chars = 100;
/// A canonical PCM WAV file: 44 header bytes (RIFF, fmt and data chunk headers), then samples.
constexpr double wav_header_bytes = 44.0;
constexpr double wav_24bit_bytes_per_sample = 3.0;
constexpr double cents_per_semitone = 100.0;
constexpr double ms_per_s = 1000.0;
constexpr double bytes_per_kib = 1024.0;

std::string size_text(double bytes) {
    if (bytes < bytes_per_kib) return printf_text("%.0f B", bytes);
    if (bytes < bytes_per_kib * bytes_per_kib) return printf_text("%.1f KiB", bytes / bytes_per_kib);
    return printf_text("%.1f MiB", bytes / (bytes_per_kib * bytes_per_kib));
}

/// "1.900 s to 0.800 s" for a segment with an end, "6.400 s to end" for the last.
std::string segment_text(const decay_segment& seg) {
    const std::string t60 = std::isinf(seg.t60_s) ? (seg.t60_s > 0 ? "inf" : "-inf") : printf_text("%.3f", seg.t60_s);
    return t60 + " s to " + (seg.until_s ? printf_text("%.3f s", *seg.until_s) : std::string("end"));
}

/// Prints the envelope's segments after a fixed-width row prefix, wrapping at the table width.
void print_segments(std::ostream& os, const std::string& prefix, const envelope& env) {
    std::string line = prefix;
    const std::string indent(prefix.size(), ' ');
    for (std::size_t i = 0; i < env.decay.size(); ++i) {
        const std::string cell = segment_text(env.decay[i]) + (i + 1 < env.decay.size() ? "," : "");
        if (line.size() > prefix.size() && line.size() + 1 + cell.size() > table_width_chars) {
            os << line << '\n';
            line = indent;
        }
        if (line.size() > prefix.size()) line += ' ';
        line += cell;
    }
    os << line << '\n';
}

/// "+1.25" with `decimals` digits; a value that rounds to zero prints as "+0.00", never "-0.00".
std::string signed_text(double v, int decimals) {
    const double scale = std::pow(10.0, decimals);
    double r = std::round(v * scale) / scale;
    if (r == 0.0) r = 0.0;
    return printf_text("%+.*f", decimals, r);
}

std::string pitch_text(double f0_hz) {
    if (f0_hz <= 0.0) return "0 (no pitch centre)";
    const double midi = hz_to_midi(f0_hz);
    const double nearest = std::round(midi);
    std::string out = printf_text("%.6f Hz", f0_hz);
    if (nearest < 0.0 || nearest > 127.0) return out + " (outside the MIDI note range)";
    return out + " = " + note_name(static_cast<int>(nearest)) + " " +
           signed_text((midi - nearest) * cents_per_semitone, 1) + printf_text(" cents (MIDI %d)", static_cast<int>(nearest));
}

/// "F#3 -1.87 cents (184.744 Hz, A4 = 440 Hz), found by harmonic-series"; "none: unpitched".
std::string root_text(const note_info& n) {
    if (n.root.method == root_method::unpitched) return "none: unpitched (no pitch centre)";
    const double hz = root_hz(n);
    if (n.root.method == root_method::unstated) {
        return hz > 0.0 ? "not stated; f0 serves (" + pitch_text(hz) + ")" : "not stated, and no f0";
    }
    return note_name(n.root.midi) + " " + signed_text(n.root.tuning_cents, 2) +
           printf_text(" cents (%.3f Hz, A4 = %g Hz), found by ", hz, n.root.a4_hz) +
           std::string(root_method_name(n.root.method));
}

int run_info(const std::filesystem::path& path) {
    const patch_read_result r = read_patch_file(path);
    warn_all(r.warnings);
    std::cout << patch_info_text(r.value, path);
    return exit_ok;
}

/// Where each part sits between the channels (stereo patches): pan, the level difference it
/// means under the pan law (core/stereo.hpp), delay and spread; bands' pan and coherence.
void write_stereo_table(std::ostringstream& os, const patch& p) {
    os << "\n  stereo: pan -1 left .. +1 right (constant power, 0 dB per channel at centre); R-L level difference\n";
    os << "     #        freq_hz      pan   R-L dB  delay_us  spread dB/s\n";
    const auto diff_text = [](double pan) {
        const double d = pan_level_difference_db(pan);
        return std::isinf(d) ? std::string(d > 0 ? "  R only" : "  L only") : printf_text("%+8.2f", d);
    };
    for (std::size_t i = 0; i < p.partials.size(); ++i) {
        const partial& q = p.partials[i];
        os << printf_text("  %4zu  %13.6f  %+7.4f  %s  %8.2f  %+11.3f\n", i + 1, q.freq_hz, q.place.pan,
                          diff_text(q.place.pan).c_str(), q.place.delay_us, q.place.spread_db_per_s);
    }
    for (std::size_t i = 0; i < p.noise.size(); ++i) {
        const noise_band& b = p.noise[i];
        os << printf_text("  noise %zu  %.0f-%.0f Hz  pan %+7.4f  R-L %s dB  coherence %.3f  spread %+.3f dB/s\n", i + 1,
                          b.low_hz, b.high_hz, b.place.pan, diff_text(b.place.pan).c_str(), b.coherence,
                          b.place.spread_db_per_s);
    }
}

}  // namespace

std::string patch_info_text(const patch& p, const std::filesystem::path& path) {
    std::ostringstream os;
    const note_info& n = p.note;

    os << printable(path.string()) << " (" << patch_format_name << " version " << written_format_version(p) << ")\n";
    os << "  name      " << (n.name.empty() ? "(none)" : printable(n.name)) << '\n';
    os << "  f0        " << pitch_text(n.f0_hz) << '\n';
    os << "  B         " << printf_text("%.4e", n.inharmonicity_b) << '\n';
    os << "  root      " << root_text(n) << '\n';
    os << "  length    " << printf_text("%.4f s, gain %.2f dB", n.length_s, n.gain_db) << '\n';
    os << "  content   " << p.partials.size() << (p.partials.size() == 1 ? " partial, " : " partials, ")
              << p.noise.size() << (p.noise.size() == 1 ? " noise band" : " noise bands") << '\n';
    const source_info& s = p.source;
    os << "  source    " << (s.file.empty() ? "(none)" : printable(s.file))
              << (s.sample_rate_hz > 0.0 ? printf_text(", %.0f Hz", s.sample_rate_hz) : std::string(", rate unknown"))
              << printf_text(", onset %.6f s", s.onset_s) << '\n';
    if (s.analysis) {
        const analysis_settings& a = *s.analysis;
        os << "  analysis  " << (a.window.empty() ? "(window unnamed)" : printable(a.window))
                  << printf_text(", FFT %d, window %.3f ms, hop %.3f ms", a.fft_size, a.window_s * ms_per_s,
                                a.hop_s * ms_per_s)
                  << '\n';
    }
    std::error_code ec;
    const double patch_bytes = static_cast<double>(std::filesystem::file_size(path, ec));
    os << "  size      " << size_text(patch_bytes) << " as a patch";
    if (s.sample_rate_hz > 0.0) {
        const double wav_bytes = wav_header_bytes + std::ceil(n.length_s * s.sample_rate_hz) * wav_24bit_bytes_per_sample *
                                                        static_cast<double>(n.channels);
        os << "; " << size_text(wav_bytes) << printf_text(" as a 24-bit %s WAV of %.4f s at %.0f Hz (%.0fx)", is_stereo(p) ? "stereo" : "mono",
                                                                 n.length_s, s.sample_rate_hz, wav_bytes / patch_bytes);
    }
    os << "\n";

    if (!p.partials.empty()) {
        os << "\n     #  harm        freq_hz    cents  peak_db  att_ms  decay: T60 to segment end\n";
        for (std::size_t i = 0; i < p.partials.size(); ++i) {
            const partial& q = p.partials[i];
            std::string cents = "";
            if (q.harmonic > 0 && n.f0_hz > 0.0) {
                cents = signed_text(cents_between(q.freq_hz, stiff_partial_hz(n.f0_hz, n.inharmonicity_b, q.harmonic)), 2);
            }
            const std::string prefix = printf_text("  %4zu  %4d  %13.6f  %7s  %7.2f  %6.2f  ", i + 1, q.harmonic,
                                                  q.freq_hz, cents.c_str(), q.env.peak.db, q.env.attack_s * ms_per_s);
            print_segments(os, prefix, q.env);
        }
        os << "  cents: residual from the fitted series n f0 sqrt(1 + B n^2); blank for harmonic 0\n";
    }
    if (is_stereo(p)) write_stereo_table(os, p);
    if (!p.noise.empty()) {
        os << "\n  noise     low_hz     high_hz  peak_db  att_ms  decay: T60 to segment end\n";
        for (std::size_t i = 0; i < p.noise.size(); ++i) {
            const noise_band& b = p.noise[i];
            const std::string prefix = printf_text("  %5zu  %9.2f  %10.2f  %7.2f  %6.2f  ", i + 1, b.low_hz, b.high_hz,
                                                  b.env.peak.db, b.env.attack_s * ms_per_s);
            print_segments(os, prefix, b.env);
        }
    }
    return os.str();
}

void add_info_command(CLI::App& app, command_registry& reg) {
    CLI::App* sub = app.add_subcommand("info", "Show what a patch holds: the note, its partials and noise bands");
    static std::string patch_path;
    sub->add_option("PATCH", patch_path, "Patch file (.toml) to describe")->required();
    sub->footer("Examples:\n  wane info patches/steel-pluck.toml\n  wane info note.toml 2>warnings.txt");
    reg.add(sub, [] { return run_info(patch_path); });
}

}  // namespace wane::cli

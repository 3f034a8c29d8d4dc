#include "report/report.hpp"

#include <png.h>
#include <sndfile.h>

#include <algorithm>
#include <cassert>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <limits>
#include <sstream>

#include "core/pitch_names.hpp"
#include "core/units.hpp"
#include "io/errors.hpp"
#include "spectrum/stft.hpp"

namespace wane {

namespace {

// ---- encodings ----------------------------------------------------------------------------

struct memory_file {
    std::string bytes;
    sf_count_t pos = 0;
};

sf_count_t vio_length(void* user) { return static_cast<sf_count_t>(static_cast<memory_file*>(user)->bytes.size()); }
sf_count_t vio_seek(sf_count_t offset, int whence, void* user) {
    auto* f = static_cast<memory_file*>(user);
    const auto size = static_cast<sf_count_t>(f->bytes.size());
    sf_count_t base = 0;
    if (whence == SEEK_CUR) base = f->pos;
    if (whence == SEEK_END) base = size;
    f->pos = std::max<sf_count_t>(0, base + offset);
    return f->pos;
}
sf_count_t vio_read(void* ptr, sf_count_t count, void* user) {
    auto* f = static_cast<memory_file*>(user);
    const auto size = static_cast<sf_count_t>(f->bytes.size());
    const sf_count_t n = std::clamp<sf_count_t>(size - f->pos, 0, count);
    std::memcpy(ptr, f->bytes.data() + f->pos, static_cast<std::size_t>(n));
    f->pos += n;
    return n;
}
sf_count_t vio_write(const void* ptr, sf_count_t count, void* user) {
    auto* f = static_cast<memory_file*>(user);
    const auto end = static_cast<std::size_t>(f->pos + count);
    if (f->bytes.size() < end) f->bytes.resize(end);
    std::memcpy(f->bytes.data() + f->pos, ptr, static_cast<std::size_t>(count));
    f->pos += count;
    return count;
}
sf_count_t vio_tell(void* user) { return static_cast<memory_file*>(user)->pos; }

void png_append(png_structp png, png_bytep data, png_size_t length) {
    auto* out = static_cast<std::string*>(png_get_io_ptr(png));
    out->append(reinterpret_cast<const char*>(data), length);
}
void png_noop_flush(png_structp) {}

struct rgb {
    unsigned char r, g, b;
};

/// Cubehelix colour scheme (Green 2011, Bull. Astr. Soc. India 39, 289; constants from memory):
/// lightness l runs 0 (black) .. 1 (white) with a helical hue; start 0.5, rotations -0.5, hue 0.9
/// keep it a blue-violet ramp, monotone in perceived lightness, so red-orange tracks stand out.
rgb cubehelix(double lightness) {
    constexpr double start = 0.5, rotations = -0.5, hue = 0.9;
    const double l = std::clamp(lightness, 0.0, 1.0);
    const double angle = two_pi * (start / 3.0 + 1.0 + rotations * l);
    const double amp = hue * l * (1.0 - l) / 2.0;
    const double c = std::cos(angle), s = std::sin(angle);
    auto to_byte = [](double v) { return static_cast<unsigned char>(std::lround(255.0 * std::clamp(v, 0.0, 1.0))); };
    return {to_byte(l + amp * (-0.14861 * c + 1.78277 * s)), to_byte(l + amp * (-0.29227 * c - 0.90649 * s)),
            to_byte(l + amp * (1.97294 * c))};
}

/// Spectrogram colour of a level fraction (0 = range_db below the peak or quieter, 1 = the peak):
/// quiet is white paper, loud is dark ink.
rgb level_colour(double fraction) { return cubehelix(1.0 - std::clamp(fraction, 0.0, 1.0)); }

std::string hex_colour(rgb c) {
    char buf[8];
    std::snprintf(buf, sizeof buf, "#%02x%02x%02x", c.r, c.g, c.b);
    return buf;
}

std::string fmt(const char* format, double v) {
    char buf[64];
    std::snprintf(buf, sizeof buf, format, v);
    return buf;
}

std::string escape_html(std::string_view text) {
    std::string out;
    out.reserve(text.size());
    for (char ch : text) {
        switch (ch) {
            case '<': out += "&lt;"; break;
            case '>': out += "&gt;"; break;
            case '&': out += "&amp;"; break;
            case '"': out += "&quot;"; break;
            default: out += ch;
        }
    }
    return out;
}

/// "Nice" tick step for an axis span (1, 2 or 5 times a power of ten).
double tick_step(double span, int target_ticks) {
    const double raw = span / std::max(1, target_ticks);
    const double mag = std::pow(10.0, std::floor(std::log10(raw)));
    for (double m : {1.0, 2.0, 5.0, 10.0}) {
        if (m * mag >= raw) return m * mag;
    }
    return 10.0 * mag;
}

/// Plot frame: maps data (x, y) to SVG pixels inside margins.
struct plot_frame {
    double width, height, left = 64, right = 16, top = 16, bottom = 48;
    double x0, x1, y0, y1;
    double px(double x) const { return left + (x - x0) / (x1 - x0) * (width - left - right); }
    double py(double y) const { return top + (y1 - y) / (y1 - y0) * (height - top - bottom); }
};

constexpr int axis_x_ticks = 8, axis_y_ticks = 6;  // about this many ticks per axis

/// Decimals that show a tick step exactly (0.5 -> 1, 0.05 -> 2, 200 -> 0).
int tick_decimals(double step) { return std::max(0, static_cast<int>(-std::floor(std::log10(step) + 1e-9))); }

std::string tick_text(double v, double step) {
    char buf[64];
    std::snprintf(buf, sizeof buf, "%.*f", tick_decimals(step), std::abs(v) < 1e-9 * step ? 0.0 : v);
    return buf;
}

std::string svg_axes(const plot_frame& f, const std::string& x_label, const std::string& y_label) {
    std::ostringstream o;
    const double bottom = f.height - f.bottom;
    o << "<rect x='" << f.left << "' y='" << f.top << "' width='" << (f.width - f.left - f.right)
      << "' height='" << (bottom - f.top) << "' fill='none' stroke='#444'/>";
    const double xs = tick_step(f.x1 - f.x0, axis_x_ticks);
    const long x_first = std::lround(std::ceil(f.x0 / xs - 1e-9));
    const long x_last = std::lround(std::floor(f.x1 / xs + 1e-9));
    for (long i = x_first; i <= x_last; ++i) {
        const double x = static_cast<double>(i) * xs;
        o << "<line x1='" << f.px(x) << "' x2='" << f.px(x) << "' y1='" << bottom << "' y2='" << bottom + 5
          << "' stroke='#444'/><text x='" << f.px(x) << "' y='" << bottom + 19 << "' text-anchor='middle'>"
          << tick_text(x, xs) << "</text>";
    }
    const double ys = tick_step(f.y1 - f.y0, axis_y_ticks);
    const long y_first = std::lround(std::ceil(f.y0 / ys - 1e-9));
    const long y_last = std::lround(std::floor(f.y1 / ys + 1e-9));
    for (long i = y_first; i <= y_last; ++i) {
        const double y = static_cast<double>(i) * ys;
        o << "<line x1='" << f.left - 5 << "' x2='" << f.left << "' y1='" << f.py(y) << "' y2='" << f.py(y)
          << "' stroke='#444'/><text x='" << f.left - 8 << "' y='" << f.py(y) + 4.5 << "' text-anchor='end'>"
          << tick_text(y, ys) << "</text>";
    }
    o << "<text x='" << (f.left + f.width - f.right) / 2 << "' y='" << f.height - 6 << "' text-anchor='middle'>"
      << escape_html(x_label) << "</text><text transform='translate(15," << (f.top + bottom) / 2
      << ") rotate(-90)' text-anchor='middle'>" << escape_html(y_label) << "</text>";
    return o.str();
}

double track_mean_freq_hz(const partial_track& t) {
    double sum = 0.0;
    for (const track_point& p : t.points) sum += p.freq_hz;
    return t.points.empty() ? 0.0 : sum / static_cast<double>(t.points.size());
}

}  // namespace

/// Spectrogram power floor: -200 dB keeps log10 finite in digital silence.
constexpr double spectrogram_power_floor = 1e-20;
constexpr double spectrogram_floor_db = -200.0;

std::string base64_encode(std::string_view bytes) {
    static constexpr char alphabet[] = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    std::string out;
    out.reserve((bytes.size() + 2) / 3 * 4);
    std::size_t i = 0;
    for (; i + 2 < bytes.size(); i += 3) {
        const auto v = (static_cast<unsigned>(static_cast<unsigned char>(bytes[i])) << 16) |
                       (static_cast<unsigned>(static_cast<unsigned char>(bytes[i + 1])) << 8) |
                       static_cast<unsigned>(static_cast<unsigned char>(bytes[i + 2]));
        out += alphabet[(v >> 18) & 63];
        out += alphabet[(v >> 12) & 63];
        out += alphabet[(v >> 6) & 63];
        out += alphabet[v & 63];
    }
    const std::size_t rest = bytes.size() - i;
    if (rest > 0) {
        unsigned v = static_cast<unsigned>(static_cast<unsigned char>(bytes[i])) << 16;
        if (rest == 2) v |= static_cast<unsigned>(static_cast<unsigned char>(bytes[i + 1])) << 8;
        out += alphabet[(v >> 18) & 63];
        out += alphabet[(v >> 12) & 63];
        out += rest == 2 ? alphabet[(v >> 6) & 63] : '=';
        out += '=';
    }
    return out;
}

std::string wav_bytes(std::span<const float> samples, double sample_rate_hz) {
    float peak = 0.0f;
    for (float s : samples) peak = std::max(peak, std::abs(s));
    const float scale = peak > 1.0f ? 1.0f / peak : 1.0f;
    memory_file file;
    SF_VIRTUAL_IO vio{vio_length, vio_seek, vio_read, vio_write, vio_tell};
    SF_INFO info{};
    info.samplerate = static_cast<int>(std::lround(sample_rate_hz));
    info.channels = 1;
    info.format = SF_FORMAT_WAV | SF_FORMAT_PCM_16;
    SNDFILE* snd = sf_open_virtual(&vio, SFM_WRITE, &info, &file);
    if (snd == nullptr) throw io_error(std::string("report: cannot encode audio: ") + sf_strerror(nullptr));
    std::vector<float> scaled(samples.begin(), samples.end());
    for (float& s : scaled) s *= scale;
    sf_write_float(snd, scaled.data(), static_cast<sf_count_t>(scaled.size()));
    sf_close(snd);
    return file.bytes;
}

spectrogram_db make_spectrogram(std::span<const float> samples, double sample_rate_hz, double window_s,
                                int max_frames) {
    constexpr int zero_padding = 2;
    const int window_length = std::max(33, static_cast<int>(std::lround(window_s * sample_rate_hz)) | 1);
    stft_plan plan({.window = window_kind::blackman_harris_4, .window_length = window_length,
                    .fft_size = fast_fft_size(zero_padding * window_length)});
    const auto total = static_cast<std::int64_t>(samples.size());
    // At least window/8 apart: finer than that adds pixels but no detail.
    constexpr int min_hops_per_window = 8;
    const std::int64_t hop = std::max<std::int64_t>(window_length / min_hops_per_window,
                                                    (total + max_frames - 1) / std::max(1, max_frames));
    spectrogram_db s;
    s.bins = plan.fft_size() / 2 + 1;
    s.bin_hz = sample_rate_hz / plan.fft_size();
    s.hop_s = static_cast<double>(hop) / sample_rate_hz;
    s.start_s = 0.0;
    s.level_db.reserve(static_cast<std::size_t>((total + hop - 1) / hop) * static_cast<std::size_t>(s.bins));
    for (std::int64_t c = 0; c < total; c += hop) {
        plan.analyze(samples, c);
        for (float pw : plan.power()) {
            s.level_db.push_back(static_cast<float>(power_to_db(std::max(static_cast<double>(pw), spectrogram_power_floor))));
        }
        ++s.frames;
    }
    return s;
}

std::string spectrogram_png(const spectrogram_db& s, double max_freq_hz, double range_db) {
    constexpr int max_width = 960, max_height = 400;
    const int used_bins = std::clamp(static_cast<int>(max_freq_hz / s.bin_hz), 1, s.bins);
    const int width = std::min(s.frames, max_width);
    const int height = std::min(used_bins, max_height);
    float peak = -std::numeric_limits<float>::infinity();
    for (float v : s.level_db) peak = std::max(peak, v);
    // Digital silence stays white: the scale's top is at least range_db above the floor.
    peak = std::max(peak, static_cast<float>(spectrogram_floor_db + range_db));
    // Max-pool frames and bins into pixels; row 0 is the top (highest frequency).
    std::vector<unsigned char> pixels(static_cast<std::size_t>(width) * static_cast<std::size_t>(height) * 3);
    for (int x = 0; x < width; ++x) {
        const int f0 = x * s.frames / width, f1 = std::max(f0 + 1, (x + 1) * s.frames / width);
        for (int y = 0; y < height; ++y) {
            const int row_from_bottom = height - 1 - y;
            const int b0 = row_from_bottom * used_bins / height;
            const int b1 = std::max(b0 + 1, (row_from_bottom + 1) * used_bins / height);
            float v = -std::numeric_limits<float>::infinity();
            for (int f = f0; f < f1; ++f) {
                for (int b = b0; b < b1; ++b) v = std::max(v, s.level_db[static_cast<std::size_t>(f) * static_cast<std::size_t>(s.bins) + static_cast<std::size_t>(b)]);
            }
            const rgb c = level_colour((static_cast<double>(v) - (static_cast<double>(peak) - range_db)) / range_db);
            const std::size_t at = (static_cast<std::size_t>(y) * static_cast<std::size_t>(width) + static_cast<std::size_t>(x)) * 3;
            pixels[at] = c.r;
            pixels[at + 1] = c.g;
            pixels[at + 2] = c.b;
        }
    }
    std::string out;
    png_structp png = png_create_write_struct(PNG_LIBPNG_VER_STRING, nullptr, nullptr, nullptr);
    png_infop info = png ? png_create_info_struct(png) : nullptr;
    if (png == nullptr || info == nullptr) throw io_error("report: libpng could not start");
    if (setjmp(png_jmpbuf(png))) {
        png_destroy_write_struct(&png, &info);
        throw io_error("report: libpng failed to encode the spectrogram");
    }
    png_set_write_fn(png, &out, png_append, png_noop_flush);
    png_set_IHDR(png, info, static_cast<png_uint_32>(width), static_cast<png_uint_32>(height), 8, PNG_COLOR_TYPE_RGB,
                 PNG_INTERLACE_NONE, PNG_COMPRESSION_TYPE_DEFAULT, PNG_FILTER_TYPE_DEFAULT);
    png_write_info(png, info);
    for (int y = 0; y < height; ++y) {
        png_write_row(png, pixels.data() + static_cast<std::size_t>(y) * static_cast<std::size_t>(width) * 3);
    }
    png_write_end(png, nullptr);
    png_destroy_write_struct(&png, &info);
    return out;
}

int matching_track(const partial& part, const tracking_result& tracking, double sample_rate_hz) {
    // The tracker's continuation tolerance (tracking/tracker.hpp): max(2 bins, 1% of f).
    constexpr double tolerance_bins = 2.0, tolerance_fraction = 0.01;
    const double bin_hz = tracking.fft_size > 0 && sample_rate_hz > 0.0 ? sample_rate_hz / tracking.fft_size : 0.0;
    const double tolerance_hz = std::max(tolerance_bins * bin_hz, tolerance_fraction * part.freq_hz);
    // First a track with the partial's own harmonic number, else one carrying no number.
    for (const bool same_number : {true, false}) {
        if (same_number && part.harmonic <= 0) continue;
        int best = -1;
        double best_distance_hz = infinity;
        for (std::size_t i = 0; i < tracking.tracks.size(); ++i) {
            const partial_track& t = tracking.tracks[i];
            const bool eligible = same_number ? t.harmonic == part.harmonic : (t.harmonic == 0 || part.harmonic == 0);
            if (!eligible) continue;
            const double d = std::abs(track_mean_freq_hz(t) - part.freq_hz);
            if (d <= tolerance_hz && d < best_distance_hz) {
                best_distance_hz = d;
                best = static_cast<int>(i);
            }
        }
        if (best >= 0) return best;
    }
    return -1;
}

namespace {

// Page layout (SVG user units = CSS pixels at 100% zoom).
constexpr double spectrogram_width = 1060, spectrogram_height = 470, colour_bar_margin = 84;
constexpr double envelope_width = 352, envelope_height = 280, envelope_title_margin = 62;
constexpr std::size_t envelope_line_chars = 46, envelope_t60_lines = 2;  // more lines end in "..."
constexpr double spectrogram_range_db = 90.0;
constexpr double envelope_range_db = 80.0;   // plotted below each partial's peak
constexpr double envelope_headroom_db = 6.0;
constexpr double top_freq_margin = 1.1;       // spectrogram top over the highest partial shown
constexpr int envelope_curve_points = 240;
constexpr int spectrogram_freq_ticks = 8;     // about this many frequency ticks
constexpr double cents_per_semitone = 100.0;  // by definition of the cent
const char* const track_colour = "#ff5a1f";
const char* const measured_colour = "#79afe6";
const char* const fitted_colour = "#b0171f";

std::string seconds_text(double s) { return fmt(s < 10.0 ? "%.2f s" : "%.1f s", s); }

/// "T60 3.14 s to 0.65 s, then 7.68 s": each segment's T60 and where it ends, wrapped at segment
/// boundaries into lines of at most max_chars (a segment never splits).
std::vector<std::string> t60_lines(const envelope& env, std::size_t max_chars) {
    std::vector<std::string> lines{"T60"};
    bool first = true;
    for (const decay_segment& seg : env.decay) {
        std::string piece;
        if (std::isinf(seg.t60_s)) piece = "hold";
        else if (seg.t60_s < 0.0) piece = "rise " + fmt("%.2f s", -seg.t60_s);
        else piece = seconds_text(seg.t60_s);
        if (seg.until_s) piece += " to " + fmt("%.2f s", *seg.until_s);
        if (!first) lines.back() += ",";
        const std::string joined = lines.back() + (first ? " " : " then ") + piece;
        if (joined.size() <= max_chars || first) lines.back() = joined;
        else lines.push_back("then " + piece);
        first = false;
    }
    return lines;
}

/// Top frequency of the spectrogram: top_freq_margin above the highest partial within
/// spectrogram_range_db of the loudest, rounded up to a tick, at most limit_hz.
double spectrogram_top_hz(const patch& p, double limit_hz) {
    double loudest_db = -infinity;
    for (const partial& q : p.partials) loudest_db = std::max(loudest_db, q.env.peak.db);
    double highest_hz = 0.0;
    for (const partial& q : p.partials) {
        if (q.env.peak.db >= loudest_db - spectrogram_range_db) highest_hz = std::max(highest_hz, q.freq_hz);
    }
    if (highest_hz <= 0.0) return limit_hz;
    const double step = tick_step(top_freq_margin * highest_hz, spectrogram_freq_ticks);
    return std::min(limit_hz, std::ceil(top_freq_margin * highest_hz / step) * step);
}

constexpr double silence_amp = 1e-10;  // -200 dBFS: the peak shown for digital silence

float peak_abs(std::span<const float> x) {
    float peak = 0.0f;
    for (float v : x) peak = std::max(peak, std::abs(v));
    return peak;
}

void write_summary(std::ostringstream& h, const report_inputs& in) {
    const patch& p = *in.value;
    h << "<section id='summary'><h1>" << escape_html(in.title) << "</h1>\n<nav>"
      << "<a href='#spectrogram'>spectrogram</a> · <a href='#envelopes'>envelopes</a> · "
      << "<a href='#patch'>patch</a> · <a href='#compare'>source versus render</a> · <a href='#listen'>listen</a>"
      << "</nav>\n<table class='facts'>";
    auto row = [&](const std::string& k, const std::string& v) {
        h << "<tr><th>" << escape_html(k) << "</th><td>" << escape_html(v) << "</td></tr>";
    };
    if (!p.note.name.empty()) row("note", p.note.name);
    if (p.note.f0_hz > 0.0) {
        const double midi = hz_to_midi(p.note.f0_hz);
        const int nearest = static_cast<int>(std::lround(midi));
        row("pitch", fmt("%.3f Hz", p.note.f0_hz) + " = " + note_name(nearest) + " " +
                         fmt("%+.1f cents", cents_per_semitone * (midi - nearest)) + (p.note.inharmonicity_b > 0.0
                                                                             ? ", inharmonicity B " + fmt("%.3g", p.note.inharmonicity_b)
                                                                             : std::string()));
    } else {
        row("pitch", "no pitch centre");
    }
    row("model", std::to_string(p.partials.size()) + " partials, " + std::to_string(p.noise.size()) +
                     " noise bands, " + seconds_text(p.note.length_s) + " long");
    row("source", p.source.file + ", " + fmt("%.0f Hz", p.source.sample_rate_hz) + ", onset at " +
                      fmt("%.3f s", p.source.onset_s));
    if (p.source.analysis) {
        const analysis_settings& a = *p.source.analysis;
        row("analysis", a.window + " window " + fmt("%.1f ms", 1000.0 * a.window_s) + ", FFT " +
                            std::to_string(a.fft_size) + ", hop " + fmt("%.1f ms", 1000.0 * a.hop_s));
    }
    if (in.comparison != nullptr) {
        const compare_result& r = *in.comparison;
        row("render against source", "log-spectral distance " + fmt("%.2f dB", r.whole.log_spectral_distance_db) +
                                         " (whole note), " + fmt("%.2f dB", r.early.log_spectral_distance_db) +
                                         " (first " + fmt("%.0f ms", 1000.0 * r.early_window_s) + ")");
    }
    h << "</table></section>\n";
}

void write_spectrogram(std::ostringstream& h, const report_inputs& in) {
    const patch& p = *in.value;
    h << "<section id='spectrogram'><h2>Spectrogram and partial tracks</h2>\n";
    const spectrogram_db& s = in.spectrogram;
    if (s.frames <= 0 || s.bins <= 0) {
        h << "<p>No spectrogram.</p></section>\n";
        return;
    }
    const double top_hz = std::min(spectrogram_top_hz(p, in.max_plot_freq_hz), s.bin_hz * (s.bins - 1));
    const std::string png = spectrogram_png(s, top_hz, spectrogram_range_db);
    plot_frame f{.width = spectrogram_width, .height = spectrogram_height, .right = colour_bar_margin,
                 .x0 = s.start_s, .x1 = s.start_s + s.hop_s * s.frames, .y0 = 0.0, .y1 = top_hz};
    const double plot_w = f.width - f.left - f.right, plot_h = f.height - f.top - f.bottom;
    h << "<svg class='wide' viewBox='0 0 " << f.width << " " << f.height << "' xmlns='http://www.w3.org/2000/svg'>"
      << "<image x='" << f.left << "' y='" << f.top << "' width='" << plot_w << "' height='" << plot_h
      << "' preserveAspectRatio='none' href='data:image/png;base64," << base64_encode(png) << "'/>";
    h << "<clipPath id='spectrogram-clip'><rect x='" << f.left << "' y='" << f.top << "' width='" << plot_w
      << "' height='" << plot_h << "'/></clipPath><g clip-path='url(#spectrogram-clip)'>";
    if (in.tracking != nullptr) {
        for (const partial_track& t : in.tracking->tracks) {
            if (t.points.empty() || track_mean_freq_hz(t) > top_hz) continue;
            h << "<polyline fill='none' stroke='" << track_colour << "' stroke-width='1.3' points='";
            for (const track_point& pt : t.points) {
                h << fmt("%.1f", f.px(pt.time_s + p.source.onset_s)) << ',' << fmt("%.1f", f.py(pt.freq_hz)) << ' ';
            }
            h << "'/>";
        }
    }
    const double onset_x = f.px(p.source.onset_s);
    h << "<line x1='" << onset_x << "' x2='" << onset_x << "' y1='" << f.top << "' y2='" << f.top + plot_h
      << "' stroke='#2a7' stroke-width='1.5' stroke-dasharray='5,4'/><text x='" << onset_x + 4 << "' y='"
      << f.top + 14 << "' fill='#1a6'>onset</text></g>";
    // Colour bar: level_colour from 0 dB (top) to -range (bottom).
    constexpr int stops = 10;
    const double bar_x = f.width - f.right + 14, bar_w = 14;
    h << "<linearGradient id='level-bar' x1='0' y1='0' x2='0' y2='1'>";
    for (int i = 0; i <= stops; ++i) {
        h << "<stop offset='" << fmt("%.2f", static_cast<double>(i) / stops) << "' stop-color='"
          << hex_colour(level_colour(1.0 - static_cast<double>(i) / stops)) << "'/>";
    }
    h << "</linearGradient><rect x='" << bar_x << "' y='" << f.top << "' width='" << bar_w << "' height='" << plot_h
      << "' fill='url(#level-bar)' stroke='#444'/>";
    constexpr double bar_tick_db = 15.0;
    const long bar_ticks = std::lround(std::floor(spectrogram_range_db / bar_tick_db + 1e-9));
    for (long i = 0; i <= bar_ticks; ++i) {
        const double db = -static_cast<double>(i) * bar_tick_db;
        const double y = f.top + (-db / spectrogram_range_db) * plot_h;
        h << "<text x='" << bar_x + bar_w + 4 << "' y='" << y + 4.5 << "'>" << fmt("%.0f", db) << "</text>";
    }
    h << "<text transform='translate(" << f.width - 6 << "," << f.top + plot_h / 2
      << ") rotate(-90)' text-anchor='middle'>level re loudest (dB)</text>";
    h << svg_axes(f, "time in the source file (s)", "frequency (Hz)") << "</svg>\n";
    h << "<p class='note'>STFT levels from " << fmt("%.0f", -spectrogram_range_db)
      << " dB to 0 dB re the loudest bin (Blackman-Harris window, " << fmt("%.0f ms", 1000.0 * s.hop_s)
      << " between columns); <span style='color:" << track_colour << "'>orange</span>: the partial tracks the "
      << "analysis measured; green dashes: the onset.</p>\n</section>\n";
}

void write_envelopes(std::ostringstream& h, const report_inputs& in) {
    const patch& p = *in.value;
    h << "<section id='envelopes'><h2>Partial levels and fitted envelopes</h2>\n<p class='note'>The "
      << std::min<std::size_t>(p.partials.size(), static_cast<std::size_t>(std::max(0, in.envelope_plots)))
      << " strongest partials by peak level, in order of frequency. <span style='color:" << measured_colour
      << "'>Wide blue</span>: the level the analysis measured along the partial's track; <span style='color:"
      << fitted_colour << "'>thin red</span>: the envelope in the patch, dots at its segment ends.</p>\n"
      << "<div class='grid'>\n";
    std::vector<std::size_t> order(p.partials.size());
    for (std::size_t i = 0; i < order.size(); ++i) order[i] = i;
    std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) {
        return p.partials[a].env.peak.db > p.partials[b].env.peak.db;
    });
    order.resize(std::min<std::size_t>(order.size(), static_cast<std::size_t>(std::max(0, in.envelope_plots))));
    std::sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) {
        return p.partials[a].freq_hz < p.partials[b].freq_hz;
    });
    const double rate_hz = in.source_rate_hz > 0.0 ? in.source_rate_hz : p.source.sample_rate_hz;
    for (const std::size_t idx : order) {
        const partial& part = p.partials[idx];
        const int track_index = in.tracking != nullptr ? matching_track(part, *in.tracking, rate_hz) : -1;
        const partial_track* track = track_index >= 0 ? &in.tracking->tracks[static_cast<std::size_t>(track_index)] : nullptr;
        const double peak = part.env.peak.db;
        plot_frame f{.width = envelope_width, .height = envelope_height, .top = envelope_title_margin,
                     .x0 = 0.0, .x1 = std::max(0.1, p.note.length_s),
                     .y0 = std::floor((peak - envelope_range_db) / 10.0) * 10.0,
                     .y1 = std::ceil((peak + envelope_headroom_db) / 10.0) * 10.0};
        h << "<svg class='envelope' width='" << f.width << "' height='" << f.height << "' data-freq-hz='"
          << fmt("%.3f", part.freq_hz) << "'";
        if (track != nullptr) h << " data-track-freq-hz='" << fmt("%.3f", track_mean_freq_hz(*track)) << "'";
        h << " xmlns='http://www.w3.org/2000/svg'>";
        h << "<text x='4' y='16' class='title'>partial " << idx + 1;
        if (part.harmonic > 0) h << " (harmonic " << part.harmonic << ")";
        h << ", " << fmt("%.1f Hz", part.freq_hz) << "</text>"
          ;
        std::vector<std::string> t60 = t60_lines(part.env, envelope_line_chars);
        if (t60.size() > envelope_t60_lines) {
            t60.resize(envelope_t60_lines);
            t60.back() += " ...";
        }
        for (std::size_t i = 0; i < t60.size() && i < envelope_t60_lines; ++i) {
            h << "<text x='4' y='" << 34 + 16 * static_cast<double>(i) << "'>" << escape_html(t60[i]) << "</text>";
        }
        h << "<clipPath id='c" << idx << "'><rect x='" << f.left << "' y='" << f.top << "' width='"
          << f.width - f.left - f.right << "' height='" << f.height - f.top - f.bottom << "'/></clipPath>";
        h << "<g clip-path='url(#c" << idx << ")'>";
        if (track != nullptr) {
            h << "<polyline fill='none' stroke='" << measured_colour << "' stroke-width='6' stroke-linejoin='round' stroke-linecap='round' points='";
            for (const track_point& pt : track->points) {
                h << fmt("%.1f", f.px(pt.time_s)) << ',' << fmt("%.1f", f.py(std::max(pt.level_db, f.y0 - 10.0))) << ' ';
            }
            h << "'/>";
        }
        h << "<polyline fill='none' stroke='" << fitted_colour << "' stroke-width='1.5' points='";
        for (int i = 0; i <= envelope_curve_points; ++i) {
            const double t = f.x0 + (f.x1 - f.x0) * i / envelope_curve_points;
            const double lv = std::max(envelope_level(part.env, t).db, f.y0 - 10.0);
            h << fmt("%.1f", f.px(t)) << ',' << fmt("%.1f", f.py(lv)) << ' ';
        }
        h << "'/>";
        for (const decay_segment& seg : part.env.decay) {
            if (!seg.until_s) continue;
            h << "<circle cx='" << fmt("%.1f", f.px(*seg.until_s)) << "' cy='"
              << fmt("%.1f", f.py(std::max(envelope_level(part.env, *seg.until_s).db, f.y0 - 10.0)))
              << "' r='3' fill='" << fitted_colour << "'/>";
        }
        h << "</g>";
        if (track == nullptr) {
            h << "<text x='" << f.left + 8 << "' y='" << f.height - f.bottom - 8 << "'>no measured track</text>";
        }
        h << svg_axes(f, "time from onset (s)", "level (dBFS)") << "</svg>\n";
    }
    h << "</div></section>\n";
}

std::string decay_cell(const decay_times& d) {
    // The ISO 3382-1 figure; else the fit over a range too close to the noise, in parentheses.
    if (std::isfinite(d.t30_s)) return fmt("%.3f s", d.t30_s);
    if (std::isfinite(d.t30_fit.t60_s)) return fmt("(%.3f s)", d.t30_fit.t60_s);
    return "–";
}

std::string decay_cell_t20(const decay_times& d) {
    if (std::isfinite(d.t20_s)) return fmt("%.3f s", d.t20_s);
    if (std::isfinite(d.t20_fit.t60_s)) return fmt("(%.3f s)", d.t20_fit.t60_s);
    return "–";
}

std::string value_or_dash(const char* format, double v) { return std::isfinite(v) ? fmt(format, v) : "–"; }

void write_compare(std::ostringstream& h, const report_inputs& in) {
    h << "<section id='compare'><h2>Source versus render</h2>\n";
    if (in.comparison == nullptr) {
        h << "<p>" << escape_html(in.comparison_note.empty() ? "No comparison." : in.comparison_note)
          << "</p></section>\n";
        return;
    }
    const compare_result& r = *in.comparison;
    const std::string early = "first " + fmt("%.0f ms", 1000.0 * r.early_window_s);
    std::string sizes;
    for (const auto& res : r.whole.per_resolution) sizes += (sizes.empty() ? "" : ", ") + std::to_string(res.fft_size);
    h << "<div class='grid'><table><tr><th>figure</th><th>whole note</th><th>" << early << "</th></tr>"
      << "<tr><td>log-spectral distance (STFT sizes " << sizes << ")</td><td>"
      << value_or_dash("%.2f dB", r.whole.log_spectral_distance_db) << "</td><td>"
      << value_or_dash("%.2f dB", r.early.log_spectral_distance_db) << "</td></tr>"
      << "<tr><td>spectral convergence</td><td>" << value_or_dash("%.4f", r.whole.spectral_convergence) << "</td><td>"
      << value_or_dash("%.4f", r.early.spectral_convergence) << "</td></tr>"
      << "<tr><td>time-domain SNR</td><td></td><td>"
      << (std::isinf(r.early_snr_db) && r.early_snr_db > 0 ? std::string("identical") : value_or_dash("%.2f dB", r.early_snr_db))
      << "</td></tr>";
    if (r.f0_difference_cents) {
        h << "<tr><td>f0 of the render against the source</td><td>" << value_or_dash("%+.2f cents", *r.f0_difference_cents)
          << "</td><td></td></tr>";
    }
    // b[n + lag] lines up with a[n] (measure/align.hpp): the render's first sample with a[-lag].
    const double aligned_s = in.comparison_from_s - static_cast<double>(r.align.lag_frames) / r.sample_rate_hz;
    h << "<tr><td>start of the render aligned to the source at</td><td>" << fmt("%.3f s", aligned_s)
      << " (patch onset " << fmt("%.3f s", in.value->source.onset_s) << ")</td><td></td></tr></table>\n";
    h << "<table><tr><th>octave band</th><th>T20 source</th><th>T20 render</th><th>T30 source</th><th>T30 render</th></tr>";
    for (const band_decay_pair& b : r.bands) {
        h << "<tr><td>" << fmt("%.0f Hz", b.band.nominal_hz) << "</td><td>" << decay_cell_t20(b.a) << "</td><td>"
          << decay_cell_t20(b.b) << "</td><td>" << decay_cell(b.a) << "</td><td>" << decay_cell(b.b) << "</td></tr>";
    }
    h << "</table></div>\n<p class='note'>Spectral distances over bins within "
      << fmt("%.0f dB", compare_params{}.spectral.range_db) << " of the source's peak, after "
      << "aligning the onsets. Decay times by Schroeder backward integration from the source's onset, T20 fitted "
      << "over −5..−25 dB and T30 over −5..−35 dB, extrapolated to 60 dB (ISO 3382-1); in parentheses: the range "
      << "lies within 10 dB of the noise or of the end of the file; –: the range is not reached.</p></section>\n";
}

void write_player(std::ostringstream& h, const std::string& label, std::span<const float> audio, double rate_hz) {
    const float peak = peak_abs(audio);
    h << "<p><b>" << escape_html(label) << "</b> (" << seconds_text(static_cast<double>(audio.size()) / rate_hz) << ", "
      << fmt("%.0f Hz", rate_hz) << ", peak " << fmt("%.1f dBFS", to_level(amp_lin{std::max(static_cast<double>(peak), silence_amp)}).db);
    if (peak > 1.0f) h << "; scaled down by " << fmt("%.1f dB", to_level(amp_lin{static_cast<double>(peak)}).db) << " to avoid clipping";
    h << ")<br><audio controls preload='metadata' src='data:audio/wav;base64,"
      << base64_encode(wav_bytes(audio, rate_hz)) << "'></audio></p>\n";
}

}  // namespace

std::string make_report_html(const report_inputs& in) {
    assert(in.value != nullptr);
    std::ostringstream h;
    h << "<!DOCTYPE html>\n<html lang='en'><head><meta charset='utf-8'>"
      << "<meta name='viewport' content='width=device-width, initial-scale=1'>"
      << "<title>" << escape_html(in.title) << "</title><style>"
      << "body{font-family:system-ui,sans-serif;font-size:16px;max-width:1120px;margin:1em auto;padding:0 1em;"
      << "color:#222;line-height:1.4}h1{font-size:1.7em;margin:0.3em 0}nav{margin-bottom:0.8em}"
      << "svg text{font-size:13px;fill:#222}svg text.title{font-weight:600}svg.wide{width:100%;height:auto}"
      << "pre{font-size:13px;overflow-x:auto;background:#f6f6f6;padding:8px}"
      << "table{border-collapse:collapse;margin:0.4em 0}td,th{border:1px solid #ccc;padding:3px 10px;text-align:left}"
      << "th{background:#f2f2f2}table.facts th{width:11em}.grid{display:flex;flex-wrap:wrap;gap:12px 18px}"
      << "h2{border-bottom:1px solid #ddd;margin-top:1.4em}.note{color:#444;font-size:0.93em}"
      << "</style></head><body>\n";
    write_summary(h, in);
    write_spectrogram(h, in);
    write_envelopes(h, in);
    h << "<section id='patch'><h2>Patch</h2><pre>" << escape_html(in.info_table) << "</pre></section>\n";
    write_compare(h, in);
    h << "<section id='listen'><h2>Listen</h2><p class='note'>Audition at low volume first.</p>\n";
    if (!in.source_audio.empty()) {
        write_player(h, "Source" + (in.source_name.empty() ? std::string() : ": " + in.source_name), in.source_audio,
                     in.source_rate_hz);
    }
    if (!in.render_audio.empty()) write_player(h, "Render of the patch", in.render_audio, in.render_rate_hz);
    h << "</section>\n</body></html>\n";
    return h.str();
}

}  // namespace wane

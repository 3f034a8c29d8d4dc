#include "report/report.hpp"

#include <png.h>
#include <sndfile.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <limits>
#include <sstream>

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

/// Cubehelix colour scheme (Green 2011, Bull. Astr. Soc. India 39, 289; constants from memory),
/// start 0.5, rotations -1.5, hue 1.2, gamma 1: dark blue-black through to white, monotone in
/// perceived lightness.
rgb cubehelix(double fraction) {
    constexpr double start = 0.5, rotations = -1.5, hue = 1.2;
    const double l = std::clamp(fraction, 0.0, 1.0);
    const double angle = two_pi * (start / 3.0 + 1.0 + rotations * l);
    const double amp = hue * l * (1.0 - l) / 2.0;
    const double c = std::cos(angle), s = std::sin(angle);
    auto to_byte = [](double v) { return static_cast<unsigned char>(std::lround(255.0 * std::clamp(v, 0.0, 1.0))); };
    return {to_byte(l + amp * (-0.14861 * c + 1.78277 * s)), to_byte(l + amp * (-0.29227 * c - 0.90649 * s)),
            to_byte(l + amp * (1.97294 * c))};
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
    double width, height, left = 64, right = 16, top = 16, bottom = 44;
    double x0, x1, y0, y1;
    double px(double x) const { return left + (x - x0) / (x1 - x0) * (width - left - right); }
    double py(double y) const { return top + (y1 - y) / (y1 - y0) * (height - top - bottom); }
};

std::string svg_axes(const plot_frame& f, const std::string& x_label, const std::string& y_label) {
    std::ostringstream o;
    o << "<rect x='" << f.left << "' y='" << f.top << "' width='" << (f.width - f.left - f.right)
      << "' height='" << (f.height - f.top - f.bottom) << "' fill='none' stroke='#444'/>";
    const double xs = tick_step(f.x1 - f.x0, 8);
    for (double x = std::ceil(f.x0 / xs) * xs; x <= f.x1 + 1e-9; x += xs) {
        o << "<line x1='" << f.px(x) << "' x2='" << f.px(x) << "' y1='" << f.height - f.bottom << "' y2='"
          << f.height - f.bottom + 4 << "' stroke='#444'/>"
          << "<text x='" << f.px(x) << "' y='" << f.height - f.bottom + 16 << "' text-anchor='middle'>"
          << fmt(xs < 1.0 ? "%.1f" : "%.0f", x) << "</text>";
    }
    const double ys = tick_step(f.y1 - f.y0, 6);
    for (double y = std::ceil(f.y0 / ys) * ys; y <= f.y1 + 1e-9; y += ys) {
        o << "<line x1='" << f.left - 4 << "' x2='" << f.left << "' y1='" << f.py(y) << "' y2='" << f.py(y)
          << "' stroke='#444'/>"
          << "<text x='" << f.left - 6 << "' y='" << f.py(y) + 4 << "' text-anchor='end'>" << fmt("%.0f", y)
          << "</text>";
    }
    o << "<text x='" << (f.left + f.width - f.right) / 2 << "' y='" << f.height - 6
      << "' text-anchor='middle'>" << escape_html(x_label) << "</text>"
      << "<text transform='translate(14," << (f.top + f.height - f.bottom) / 2
      << ") rotate(-90)' text-anchor='middle'>" << escape_html(y_label) << "</text>";
    return o.str();
}

double track_mean_freq_hz(const partial_track& t) {
    double sum = 0.0;
    for (const track_point& p : t.points) sum += p.freq_hz;
    return t.points.empty() ? 0.0 : sum / static_cast<double>(t.points.size());
}

}  // namespace

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
    constexpr double power_floor = 1e-20;  // -200 dB, keeps log10 finite in digital silence
    const int window_length = std::max(33, static_cast<int>(std::lround(window_s * sample_rate_hz)) | 1);
    stft_plan plan({.window = window_kind::blackman_harris_4, .window_length = window_length,
                    .fft_size = fast_fft_size(zero_padding * window_length)});
    const auto total = static_cast<std::int64_t>(samples.size());
    const std::int64_t hop = std::max<std::int64_t>(window_length / 4, (total + max_frames - 1) / std::max(1, max_frames));
    spectrogram_db s;
    s.bins = plan.fft_size() / 2 + 1;
    s.bin_hz = sample_rate_hz / plan.fft_size();
    s.hop_s = static_cast<double>(hop) / sample_rate_hz;
    s.start_s = 0.0;
    for (std::int64_t c = 0; c < total; c += hop) {
        plan.analyze(samples, c);
        for (float pw : plan.power()) {
            s.level_db.push_back(static_cast<float>(power_to_db(std::max(static_cast<double>(pw), power_floor))));
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
            const rgb c = cubehelix((static_cast<double>(v) - (static_cast<double>(peak) - range_db)) / range_db);
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

std::string make_report_html(const report_inputs& in) {
    const patch& p = *in.value;
    std::ostringstream h;
    h << "<!DOCTYPE html>\n<html lang='en'><head><meta charset='utf-8'>"
      << "<meta name='viewport' content='width=device-width, initial-scale=1'>"
      << "<title>" << escape_html(in.title) << "</title><style>"
      << "body{font-family:system-ui,sans-serif;max-width:1100px;margin:1em auto;padding:0 1em;color:#222}"
      << "svg text{font-size:12px;fill:#222}pre{font-size:12px;overflow-x:auto;background:#f6f6f6;padding:8px}"
      << "table{border-collapse:collapse}td,th{border:1px solid #ccc;padding:3px 8px;text-align:left}"
      << ".grid{display:flex;flex-wrap:wrap;gap:8px}h2{border-bottom:1px solid #ddd;margin-top:1.5em}"
      << "</style></head><body>\n";
    h << "<h1>" << escape_html(in.title) << "</h1>\n";
    h << "<p>" << p.partials.size() << " partials, " << p.noise.size() << " noise bands; f0 "
      << fmt("%.3f", p.note.f0_hz) << " Hz; length " << fmt("%.2f", p.note.length_s) << " s; source "
      << escape_html(p.source.file) << " at " << fmt("%.0f", p.source.sample_rate_hz) << " Hz, onset "
      << fmt("%.3f", p.source.onset_s) << " s.</p>\n";

    // Spectrogram with the tracks overlaid.
    h << "<section id='spectrogram'><h2>Spectrogram and partial tracks</h2>\n";
    const spectrogram_db& s = in.spectrogram;
    if (s.frames > 0 && s.bins > 0) {
        const double top_hz = std::min(in.max_plot_freq_hz, s.bin_hz * s.bins);
        const double range_db = 90.0;
        const std::string png = spectrogram_png(s, top_hz, range_db);
        plot_frame f{.width = 1040, .height = 460, .x0 = s.start_s, .x1 = s.start_s + s.hop_s * s.frames,
                     .y0 = 0.0, .y1 = top_hz};
        h << "<svg width='100%' viewBox='0 0 " << f.width << " " << f.height << "' xmlns='http://www.w3.org/2000/svg'>"
          << "<image x='" << f.left << "' y='" << f.top << "' width='" << f.width - f.left - f.right << "' height='"
          << f.height - f.top - f.bottom << "' preserveAspectRatio='none' href='data:image/png;base64,"
          << base64_encode(png) << "'/>";
        if (in.tracking != nullptr) {
            for (const partial_track& t : in.tracking->tracks) {
                h << "<polyline fill='none' stroke='#ff3030' stroke-width='1' stroke-opacity='0.8' points='";
                for (const track_point& pt : t.points) {
                    if (pt.freq_hz > top_hz) continue;
                    h << fmt("%.1f", f.px(pt.time_s + in.tracking->onset_s)) << ',' << fmt("%.1f", f.py(pt.freq_hz)) << ' ';
                }
                h << "'/>";
            }
        }
        h << svg_axes(f, "time in the source (s)", "frequency (Hz)") << "</svg>\n";
        h << "<p>Levels from " << fmt("%.0f", -range_db) << " dB to 0 dB re the loudest bin; red lines: partial tracks.</p>\n";
    } else {
        h << "<p>No spectrogram.</p>\n";
    }
    h << "</section>\n";

    // Level tracks with the fitted envelopes, strongest partials first.
    h << "<section id='envelopes'><h2>Partial levels and fitted envelopes</h2><div class='grid'>\n";
    std::vector<std::size_t> order(p.partials.size());
    for (std::size_t i = 0; i < order.size(); ++i) order[i] = i;
    std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) {
        return p.partials[a].env.peak.db > p.partials[b].env.peak.db;
    });
    const std::size_t plots = std::min<std::size_t>(order.size(), static_cast<std::size_t>(std::max(0, in.envelope_plots)));
    for (std::size_t k = 0; k < plots; ++k) {
        const std::size_t idx = order[k];
        const partial& part = p.partials[idx];
        const partial_track* best = nullptr;
        if (in.tracking != nullptr) {
            double best_dist = infinity;
            for (const partial_track& t : in.tracking->tracks) {
                const double d = std::abs(track_mean_freq_hz(t) - part.freq_hz);
                if (d < best_dist) {
                    best_dist = d;
                    best = &t;
                }
            }
            if (best != nullptr && best_dist > 0.05 * part.freq_hz) best = nullptr;
        }
        const double peak = part.env.peak.db;
        plot_frame f{.width = 350, .height = 240, .x0 = 0.0, .x1 = std::max(0.1, p.note.length_s),
                     .y0 = std::floor((peak - 80.0) / 10.0) * 10.0, .y1 = std::ceil((peak + 6.0) / 10.0) * 10.0};
        h << "<svg width='350' height='240' xmlns='http://www.w3.org/2000/svg'>";
        h << "<clipPath id='c" << idx << "'><rect x='" << f.left << "' y='" << f.top << "' width='"
          << f.width - f.left - f.right << "' height='" << f.height - f.top - f.bottom << "'/></clipPath>";
        h << "<g clip-path='url(#c" << idx << ")'>";
        if (best != nullptr) {
            h << "<polyline fill='none' stroke='#888' stroke-width='1' points='";
            for (const track_point& pt : best->points) {
                h << fmt("%.1f", f.px(pt.time_s)) << ',' << fmt("%.1f", f.py(pt.level_db)) << ' ';
            }
            h << "'/>";
        }
        h << "<polyline fill='none' stroke='#d02020' stroke-width='2' points='";
        constexpr int curve_points = 200;
        for (int i = 0; i <= curve_points; ++i) {
            const double t = f.x0 + (f.x1 - f.x0) * i / curve_points;
            const double lv = std::max(envelope_level(part.env, t).db, f.y0 - 10.0);
            h << fmt("%.1f", f.px(t)) << ',' << fmt("%.1f", f.py(lv)) << ' ';
        }
        h << "'/></g>";
        std::string t60s;
        for (const decay_segment& seg : part.env.decay) {
            if (!t60s.empty()) t60s += ", ";
            t60s += std::isinf(seg.t60_s) ? std::string("hold") : fmt("%.2f s", seg.t60_s);
        }
        h << "<text x='" << f.left + 6 << "' y='" << f.top + 14 << "'>partial " << idx + 1 << ": "
          << fmt("%.1f Hz", part.freq_hz) << "</text>"
          << "<text x='" << f.left + 6 << "' y='" << f.top + 28 << "'>T60 " << escape_html(t60s) << "</text>";
        h << svg_axes(f, "time from onset (s)", "level (dBFS)") << "</svg>\n";
    }
    h << "</div><p>Grey: measured level of the track; red: the fitted envelope in the patch.</p></section>\n";

    h << "<section id='patch'><h2>Patch</h2><pre>" << escape_html(in.info_table) << "</pre></section>\n";

    h << "<section id='compare'><h2>Source versus render</h2><table>\n";
    for (const auto& [label, value] : in.compare_rows) {
        h << "<tr><th>" << escape_html(label) << "</th><td>" << escape_html(value) << "</td></tr>\n";
    }
    h << "</table></section>\n";

    h << "<section id='listen'><h2>Listen</h2><p>Audition at low volume first.</p>\n";
    if (!in.source_audio.empty()) {
        h << "<p>Source<br><audio controls preload='none' src='data:audio/wav;base64,"
          << base64_encode(wav_bytes(in.source_audio, in.source_rate_hz)) << "'></audio></p>\n";
    }
    if (!in.render_audio.empty()) {
        h << "<p>Render<br><audio controls preload='none' src='data:audio/wav;base64,"
          << base64_encode(wav_bytes(in.render_audio, in.render_rate_hz)) << "'></audio></p>\n";
    }
    h << "</section>\n</body></html>\n";
    return h.str();
}

}  // namespace wane

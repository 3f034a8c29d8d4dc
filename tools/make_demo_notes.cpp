// Writes the demo notes of demo-data/ from the physical models in demo_models.hpp:
//   steel-string-d3.wav   stiff plucked string (digital waveguide)
//   tuned-bar-a3.wav      struck free-free bar (modal resonators) + tuned-bar-a3.json (ground truth)
//   garden-bell-a4.wav    bell-like tone with beating doublets (resonator bank)
// 48 kHz, 24-bit PCM mono, each normalized from its computed peak to peak_level below, quantized
// here (round to nearest) so the bytes are the same on every run.
//
// Usage: make_demo_notes OUTDIR
#include <sndfile.h>

#include <cmath>
#include <cstdint>
#include <cstdio>
#include <exception>
#include <filesystem>
#include <string>
#include <vector>

#include "core/units.hpp"
#include "demo_models.hpp"
#include "io/atomic_file.hpp"
#include "io/errors.hpp"

namespace {

namespace fs = std::filesystem;
using namespace wane;

constexpr level_db peak_level{-2.0};       // every note's sample peak after normalization
constexpr double full_scale_24 = 8388608.0;  // 2^23: 24-bit PCM full scale
constexpr std::int32_t max_code_24 = 8388607;
constexpr int pcm24_to_int32_shift = 8;    // sf_write_int takes 32-bit codes; 24-bit keeps the top 24

/// Scales to peak_level from the computed peak and rounds to 24-bit codes (round half away from
/// zero, std::lround). Fails rather than clip.
std::vector<std::int32_t> quantize_24(const std::vector<float>& x, const std::string& name) {
    double peak = 0.0;
    for (float v : x) peak = std::max(peak, std::abs(static_cast<double>(v)));
    if (!(peak > 0.0) || !std::isfinite(peak)) throw io_error(name + ": model rendered silence or non-finite samples");
    const double gain = to_amp(peak_level).lin / peak * full_scale_24;
    std::vector<std::int32_t> codes(x.size());
    for (std::size_t n = 0; n < x.size(); ++n) {
        const long q = std::lround(static_cast<double>(x[n]) * gain);
        if (q > max_code_24 || q < -max_code_24 - 1) throw io_error(name + ": sample beyond 24-bit full scale");
        codes[n] = static_cast<std::int32_t>(q);
    }
    return codes;
}

struct written {
    std::size_t frames;
    level_db peak;
};

written write_wav_24(const fs::path& path, const std::vector<float>& x, double sample_rate_hz) {
    std::vector<std::int32_t> codes = quantize_24(x, path.string());
    std::int32_t peak_code = 0;
    for (std::int32_t& c : codes) {
        peak_code = std::max(peak_code, c < 0 ? -c : c);
        c *= (1 << pcm24_to_int32_shift);
    }
    atomic_output out(path);
    SF_INFO info{};
    info.samplerate = static_cast<int>(sample_rate_hz);
    info.channels = 1;
    info.format = SF_FORMAT_WAV | SF_FORMAT_PCM_24;
    SNDFILE* f = sf_open(out.temp_path().c_str(), SFM_WRITE, &info);
    if (!f) throw io_error(path.string() + ": cannot write: " + sf_strerror(nullptr));
    sf_command(f, SFC_SET_ADD_PEAK_CHUNK, nullptr, SF_FALSE);  // keep the header free of extras
    const auto count = static_cast<sf_count_t>(codes.size());
    const sf_count_t wrote = sf_write_int(f, codes.data(), count);
    const int close_error = sf_close(f);
    if (wrote != count || close_error != 0) throw io_error(path.string() + ": write failed (disk full?)");
    out.commit();
    return {codes.size(), to_level(amp_lin{static_cast<double>(peak_code) / full_scale_24})};
}

std::string format(const char* fmt, auto... args) {
    char buf[256];
    std::snprintf(buf, sizeof buf, fmt, args...);
    return buf;
}

/// The bar's modes as JSON ground truth (fixed formatting, so the bytes are reproducible).
std::string bar_json(const demo::bar_params& p, const std::string& wav_name) {
    std::string s = "{\n";
    s += "  \"note\": \"" + wav_name + "\",\n";
    s += "  \"model\": \"struck free-free Euler-Bernoulli bar: two-pole modal resonators driven by a half-sine "
         "mallet force, plus a bandpassed mallet-noise burst\",\n";
    s += "  \"ratio_source\": \"roots x_n of cos(x) cosh(x) = 1, ratio (x_n / x_1)^2; Fletcher and Rossing, "
         "The Physics of Musical Instruments: 1 : 2.756 : 5.404 : 8.933\",\n";
    s += format("  \"sample_rate_hz\": %.0f,\n", p.sample_rate_hz);
    s += format("  \"onset_s\": %.6f,\n", p.lead_s);
    s += format("  \"contact_s\": %.6f,\n", p.contact_s);
    s += format("  \"strike_position\": %.6f,\n", p.strike_position);
    s += "  \"modes\": [\n";
    const std::vector<demo::bar_mode> modes = demo::bar_modes(p);
    for (std::size_t i = 0; i < modes.size(); ++i) {
        const demo::bar_mode& m = modes[i];
        s += format("    {\"mode\": %d, \"ratio\": %.6f, \"freq_hz\": %.6f, \"t60_s\": %.6f}%s\n", m.mode, m.ratio,
                    m.freq_hz, m.t60_s, i + 1 < modes.size() ? "," : "");
    }
    s += "  ]\n}\n";
    return s;
}

void report(const fs::path& path, const written& w, double sample_rate_hz) {
    std::printf("%s: %zu frames (%.3f s), peak %.2f dBFS\n", path.string().c_str(), w.frames,
                static_cast<double>(w.frames) / sample_rate_hz, w.peak.db);
}

}  // namespace

int main(int argc, char** argv) {
    if (argc != 2) {
        std::fprintf(stderr, "usage: make_demo_notes OUTDIR\n");
        return 2;
    }
    try {
        const fs::path dir = argv[1];
        std::error_code ec;
        if (!fs::is_directory(dir, ec)) throw io_error(dir.string() + ": output folder does not exist");

        const demo::string_params string_note;
        const fs::path string_path = dir / "steel-string-d3.wav";
        report(string_path, write_wav_24(string_path, demo::render_string(string_note), string_note.sample_rate_hz),
               string_note.sample_rate_hz);

        const demo::bar_params bar_note;
        const fs::path bar_path = dir / "tuned-bar-a3.wav";
        report(bar_path, write_wav_24(bar_path, demo::render_bar(bar_note), bar_note.sample_rate_hz),
               bar_note.sample_rate_hz);
        const fs::path json_path = dir / "tuned-bar-a3.json";
        write_file_atomic(json_path, bar_json(bar_note, bar_path.filename().string()));
        std::printf("%s: modal frequencies (ground truth)\n", json_path.string().c_str());

        const demo::bell_params bell_note;
        const fs::path bell_path = dir / "garden-bell-a4.wav";
        report(bell_path, write_wav_24(bell_path, demo::render_bell(bell_note), bell_note.sample_rate_hz),
               bell_note.sample_rate_hz);
    } catch (const std::exception& e) {
        std::fprintf(stderr, "make_demo_notes: error: %s\n", e.what());
        return 1;
    }
    return 0;
}

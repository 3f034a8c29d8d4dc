// The patch file's number formats (see patch_numbers.hpp).
#include "core/patch_numbers.hpp"

#include <cassert>
#include <charconv>
#include <cmath>
#include <system_error>

namespace wane::patch_numbers {


/// Fixed notation with `decimals` digits after the point; "inf"/"-inf" for infinities (TOML
/// spelling); a negative zero prints without its sign so "-0.000" never appears.
std::string fmt_fixed(double v, int decimals) {
    if (std::isinf(v)) return v > 0 ? "inf" : "-inf";
    if (std::isnan(v)) return "nan";
    char buf[512];  // fixed notation of the largest double needs 309 digits + decimals
    const auto res = std::to_chars(buf, buf + sizeof buf, v, std::chars_format::fixed, decimals);
    assert(res.ec == std::errc{});
    std::string s(buf, res.ptr);
    if (s.front() == '-' && s.find_first_not_of("-0.") == std::string::npos) s.erase(0, 1);
    return s;
}

/// Scientific notation with `digits` digits after the point, e.g. "2.1000e-04" (valid TOML).
std::string fmt_sci(double v, int digits) {
    if (std::isinf(v)) return v > 0 ? "inf" : "-inf";
    char buf[64];
    const auto res = std::to_chars(buf, buf + sizeof buf, v, std::chars_format::scientific, digits);
    assert(res.ec == std::errc{});
    std::string s(buf, res.ptr);
    if (s.front() == '-' && v == 0.0) s.erase(0, 1);
    return s;
}

// Precision per quantity (decimals after the point):
/// Partial and f0 frequencies: 1e-6 Hz. The rounding error (<= 5e-7 Hz) drifts the phase by at
/// most 5e-7 Hz * 10 s = 5e-6 cycles (3e-5 rad) over a 10 s note: coherent with the source.
constexpr int freq_decimals = 6;
/// Noise band edges: 0.01 Hz, far finer than any band-pass edge is meaningful.
constexpr int band_edge_decimals = 2;
/// Phase: 1e-5 rad; the rounding error (5e-6 rad) is a -106 dB error vector on the partial.
constexpr int phase_decimals = 5;
/// Envelope times and length: 0.1 ms. Finer than the analysis hop (a few ms) that measures them
/// and than the ear's temporal resolution of a few ms (common practice, no source).
constexpr int time_decimals = 4;
/// Alignment times (onset in the source, window and hop): 1 us, below one sample period even at
/// 192 kHz (5.2 us), so the patch can be lined up with its source sample-accurately.
constexpr int align_decimals = 6;
/// Levels and gains: 0.01 dB (0.12 % in amplitude).
constexpr int level_decimals = 2;
/// T60s: 0.1 ms, like the other envelope times (0.1 % of a 0.1 s decay).
constexpr int t60_decimals = 4;
/// Inharmonicity B: 5 significant digits in scientific notation (B spans 1e-6..1e-2).
constexpr int b_digits = 4;
/// Root tuning: 0.001 cent, so placing the root on a note leaves at most 0.0005 cent of rounding.
constexpr int cents_decimals = 3;
/// A4 of the root's equal temperament: 0.001 Hz (0.004 cent at 440 Hz).
constexpr int a4_decimals = 3;
/// Pan: 1e-4; at centre that is 0.0014 dB of level difference between the channels.
constexpr int pan_decimals = 4;
/// Inter-channel delay: 0.01 us; the rounding (5 ns) moves a 20 kHz partial's phase by 6e-4 rad.
constexpr int delay_us_decimals = 2;
/// Per-channel decay difference: 0.001 dB/s (0.01 dB over 10 s).
constexpr int spread_decimals = 3;
/// Noise coherence: 0.001.
constexpr int coherence_decimals = 3;
/// Glide time constant: 1 us. The glide adds G ~ 2 pi f tau c0 ln2/1200 rad of phase, so rounding
/// tau by 5e-7 s moves it by G * 5e-7 / tau: 4e-5 rad for a 40-cent, 30 ms glide at 500 Hz. The glide's
/// cents use fmt_cents (0.001 cent: 2 pi f tau 1e-3 ln2 / 2400 = 2.7e-5 rad there).
constexpr int glide_s_decimals = 6;

// One formatter per quantity; the writer prints with them and the reader rounds with them.
std::string fmt_freq(double v) { return fmt_fixed(v, freq_decimals); }
std::string fmt_band_edge(double v) { return fmt_fixed(v, band_edge_decimals); }
std::string fmt_phase(double v) { return fmt_fixed(v, phase_decimals); }
std::string fmt_time(double v) { return fmt_fixed(v, time_decimals); }
std::string fmt_align(double v) { return fmt_fixed(v, align_decimals); }
std::string fmt_level(double v) { return fmt_fixed(v, level_decimals); }
std::string fmt_t60(double v) { return fmt_fixed(v, t60_decimals); }
std::string fmt_b(double v) { return fmt_sci(v, b_digits); }
std::string fmt_cents(double v) { return fmt_fixed(v, cents_decimals); }
std::string fmt_a4(double v) { return fmt_fixed(v, a4_decimals); }
std::string fmt_pan(double v) { return fmt_fixed(v, pan_decimals); }
std::string fmt_delay_us(double v) { return fmt_fixed(v, delay_us_decimals); }
std::string fmt_spread(double v) { return fmt_fixed(v, spread_decimals); }
std::string fmt_coherence(double v) { return fmt_fixed(v, coherence_decimals); }
std::string fmt_glide_s(double v) { return fmt_fixed(v, glide_s_decimals); }

/// A sample rate: an integer when it is one (at 1e-6 Hz resolution), e.g. "48000".
std::string fmt_rate(double v) {
    std::string s = fmt_fixed(v, freq_decimals);
    std::string zeros(freq_decimals + 1, '0');  // ".000000"
    zeros[0] = '.';
    if (s.size() > zeros.size() && s.compare(s.size() - zeros.size(), zeros.size(), zeros) == 0) {
        s.erase(s.size() - zeros.size());
    }
    return s;
}

namespace {

using formatter = std::string (*)(double);

/// The value the file will hold: v printed with its quantity's format and read back.
double rounded(double v, formatter fmt) {
    if (std::isnan(v)) return v;
    const std::string text = fmt(v);
    double out = 0.0;
    const auto res = std::from_chars(text.data(), text.data() + text.size(), out);
    assert(res.ec == std::errc{});
    (void)res;
    return out;
}

void round_envelope(envelope& env) {
    env.attack_s = rounded(env.attack_s, fmt_time);
    env.peak.db = rounded(env.peak.db, fmt_level);
    for (decay_segment& seg : env.decay) {
        seg.t60_s = rounded(seg.t60_s, fmt_t60);
        if (seg.until_s) seg.until_s = rounded(*seg.until_s, fmt_time);
    }
}

void round_place(stereo_place& place) {
    place.pan = rounded(place.pan, fmt_pan);
    place.delay_us = rounded(place.delay_us, fmt_delay_us);
    place.spread_db_per_s = rounded(place.spread_db_per_s, fmt_spread);
}

}  // namespace

/// Rounds every number to the precision the file keeps, so that reading a patch gives exactly the
/// model the writer would write: parse(format(p)) == p for every patch the reader returns.
void round_to_file_precision(patch& p) {
    p.note.f0_hz = rounded(p.note.f0_hz, fmt_freq);
    p.note.length_s = rounded(p.note.length_s, fmt_time);
    p.note.inharmonicity_b = rounded(p.note.inharmonicity_b, fmt_b);
    p.note.gain_db = rounded(p.note.gain_db, fmt_level);
    p.note.root.tuning_cents = rounded(p.note.root.tuning_cents, fmt_cents);
    p.note.root.a4_hz = rounded(p.note.root.a4_hz, fmt_a4);
    p.source.sample_rate_hz = rounded(p.source.sample_rate_hz, fmt_rate);
    p.source.onset_s = rounded(p.source.onset_s, fmt_align);
    if (p.source.cut_s) p.source.cut_s = rounded(*p.source.cut_s, fmt_time);
    if (p.source.analysis) {
        p.source.analysis->window_s = rounded(p.source.analysis->window_s, fmt_align);
        p.source.analysis->hop_s = rounded(p.source.analysis->hop_s, fmt_align);
    }
    for (partial& q : p.partials) {
        q.freq_hz = rounded(q.freq_hz, fmt_freq);
        q.phase_rad = rounded(q.phase_rad, fmt_phase);
        round_envelope(q.env);
        round_place(q.place);
        q.glide_cents = rounded(q.glide_cents, fmt_cents);
        q.glide_s = rounded(q.glide_s, fmt_glide_s);
    }
    for (noise_band& b : p.noise) {
        b.low_hz = rounded(b.low_hz, fmt_band_edge);
        b.high_hz = rounded(b.high_hz, fmt_band_edge);
        round_envelope(b.env);
        round_place(b.place);
        b.coherence = rounded(b.coherence, fmt_coherence);
    }
}

int drop_unwritable_segments(envelope& env) {
    const auto as_written = [](double t) { return rounded(t, fmt_time); };
    double previous_s = as_written(env.attack_s);
    int dropped = 0;
    for (std::size_t k = 0; k < env.decay.size();) {
        const auto& until_s = env.decay[k].until_s;
        if (!until_s || env.decay.size() == 1) break;  // the last segment runs to the end; one stays
        if (as_written(*until_s) > previous_s) {
            previous_s = as_written(*until_s);
            ++k;
            continue;
        }
        env.decay.erase(env.decay.begin() + static_cast<std::ptrdiff_t>(k));
        ++dropped;
    }
    return dropped;
}

/// Shortest round-trip text of a number, for messages.
std::string show(double v) {
    if (std::isnan(v)) return "nan";
    if (std::isinf(v)) return v > 0 ? "inf" : "-inf";
    char buf[64];
    const auto res = std::to_chars(buf, buf + sizeof buf, v);
    return std::string(buf, res.ptr);
}

}  // namespace wane::patch_numbers

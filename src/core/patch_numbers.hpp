// The patch file's number formats: one fixed format per quantity (the precision each needs and why
// is in patch_numbers.cpp). The writer prints with them and the reader rounds with them, so that
// reading a file the writer wrote and writing it again gives the same bytes. Locale independent.
#pragma once

#include <string>

#include "core/patch.hpp"

namespace wane::patch_numbers {

/// Fixed notation with `decimals` digits after the point; "inf"/"-inf" for infinities (TOML
/// spelling); a negative zero prints without its sign so "-0.000" never appears.
std::string fmt_fixed(double v, int decimals);
/// Scientific notation with `digits` digits after the point, e.g. "2.1000e-04" (valid TOML).
std::string fmt_sci(double v, int digits);

std::string fmt_freq(double v);       ///< partial and f0 frequencies, 1e-6 Hz
std::string fmt_band_edge(double v);  ///< noise band edges, 0.01 Hz
std::string fmt_phase(double v);      ///< phases, 1e-5 rad
std::string fmt_time(double v);       ///< envelope times and length, 0.1 ms
std::string fmt_align(double v);      ///< onset in the source, window and hop, 1 us
std::string fmt_level(double v);      ///< levels and gains, 0.01 dB
std::string fmt_t60(double v);        ///< T60s, 0.1 ms
std::string fmt_b(double v);          ///< inharmonicity B, 5 significant digits
std::string fmt_cents(double v);      ///< the root's tuning, 0.001 cent
std::string fmt_a4(double v);         ///< A4 of the root's temperament, 0.001 Hz
std::string fmt_pan(double v);        ///< pan, 1e-4 (0.0014 dB of level difference at centre)
std::string fmt_delay_us(double v);   ///< inter-channel delay, 0.01 us
std::string fmt_spread(double v);     ///< per-channel decay difference, 0.001 dB/s
std::string fmt_coherence(double v);  ///< noise coherence between channels, 0.001
std::string fmt_glide_s(double v);    ///< a partial's glide time constant, 1 us (glide_cents: fmt_cents)
/// A sample rate: an integer when it is one (at 1e-6 Hz resolution), e.g. "48000".
std::string fmt_rate(double v);

/// Rounds every number to the precision the file keeps, so that reading a patch gives exactly the
/// model the writer would write: parse(format(p)) == p for every patch the reader returns.
void round_to_file_precision(patch& p);

/// Drops every decay segment of env whose end, rounded to the file's time precision (fmt_time,
/// 0.1 ms), is not after the breakpoint before it (the attack's end or the previous kept end, also
/// rounded): the segment after it starts at that breakpoint instead. Such a segment lasts under
/// 0.1 ms, so the level after it moves by at most |its slope - the next one's| x 0.1 ms (0.1 dB
/// for a 1000 dB/s difference); written as it was, the file would hold two equal breakpoints and
/// fail to load. Returns how many segments were dropped. For the analysis, whose joined
/// envelopes can put two breakpoints that close.
int drop_unwritable_segments(envelope& env);

/// Shortest round-trip text of a number, for messages.
std::string show(double v);

}  // namespace wane::patch_numbers

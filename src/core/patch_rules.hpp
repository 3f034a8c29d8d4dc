// The patch format's rules over the model: its limits and the validator that the reader, the
// writer, `edit` and `blend` all call. Messages name a path like "partial[3].decay[2].t60_s"
// (1-based, as `wane info` numbers them), shown as "partial 3: decay[2].t60_s must not be 0".
#pragma once

#include <cstddef>
#include <functional>
#include <optional>
#include <string>
#include <string_view>

#include "core/patch.hpp"

namespace wane::patch_rules {

/// The format's limits (what a patch file may hold). Analysis defaults (how many partials or
/// segments an analysis fits) are named apart, in tracking/ and analysis/.
/// Files above this size are refused before parsing (a patch of 4096 partials with a few decay
/// segments each is well under 2 MB; the limit bounds memory and time on hostile input).
constexpr std::size_t max_patch_file_bytes = std::size_t{16} << 20;  // 16 MiB
constexpr const char* max_patch_file_text = "16 MiB";
/// Noise bands per patch (third-octave bands over 20 Hz..20 kHz are 31; this leaves wide room).
constexpr std::size_t max_noise_bands = 1024;
/// Decay segments per envelope (the fits use a handful; this bounds hand-made files).
constexpr std::size_t max_decay_segments = 64;
/// Bounds that keep every number meaningful and printable (the core asserts nothing beyond them):
/// frequencies up to 1 MHz (above any audio rate's Nyquist frequency);
constexpr double max_freq_hz = 1e6;
/// sample rates up to 10 MHz; source onsets up to 1e6 s (11.6 days into a recording);
constexpr double max_sample_rate_hz = 1e7;
constexpr double max_onset_s = 1e6;
/// levels down to -1000 dB (amplitude 1e-50, below float's smallest normal, -758 dB);
constexpr double min_level_db = -1000.0;
/// B up to 1 (real strings are near 1e-4; 1 already puts harmonic 10 a semitone sharp ten times over);
constexpr double max_inharmonicity_b = 1.0;
/// phases within +-1000 rad (the analysis writes them wrapped to [-pi, pi]);
constexpr double max_abs_phase_rad = 1000.0;
/// FFT sizes up to 2^24 samples; strings up to 4096 bytes (a long path);
constexpr int max_fft_size = 1 << 24;
constexpr std::size_t max_string_bytes = 4096;
/// a patch nests at most 4 levels (root > partial array > partial > decay array > segment); deeper
/// structures are refused before they are walked.
constexpr int max_nesting_depth = 4;
/// Longest line: a [[partial]] with 64 decay segments takes about 3 KB, a 4096-byte string
/// written with \uXXXX escapes 25 KB; 64 KiB bounds the parser's work on one line (our choice).
constexpr std::size_t max_line_bytes = std::size_t{64} << 10;
/// Range of the root's tuning and of A4 (a root is the nearest note, so |cents| <= 50 when wane
/// writes it; by hand up to a semitone either way).
constexpr double max_tuning_cents = 100.0;
constexpr double min_a4_hz = 100.0;
constexpr double max_a4_hz = 1000.0;

/// Reports a rule broken at `path`; `what` continues the sentence ("must not be 0"). Throws.
using fail_fn = std::function<void(const std::string& path, const std::string& what)>;

/// "partial" and 0 -> "partial[1]" (paths count from 1).
std::string indexed(std::string_view name, std::size_t index0);
/// "partial[3].decay[2].t60_s" -> "partial 3: decay[2].t60_s"; "note.f0_hz" stays.
std::string display(const std::string& path);

/// Checks every rule of the format on p; calls fail (which must throw) on the first broken one.
void validate(const patch& p, const fail_fn& fail);
/// The first rule p breaks, as given or once rounded to the file's precision, as a message
/// ("partial 3: decay[2].t60_s must not be 0"); empty when p is a valid patch. p is not changed.
/// For `edit` and `blend`, which check their result before writing it.
std::optional<std::string> first_broken_rule(const patch& p);

/// Validates p as given, then rounded to the file's precision (rounding can merge two breakpoints
/// or turn a tiny T60 into 0). Leaves p rounded.
void validate_and_round(patch& p, const fail_fn& fail);

}  // namespace wane::patch_rules

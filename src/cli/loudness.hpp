// The loudness rule of every command that renders: a render peaking more than
// max_over_full_scale_db over full scale (or not finite) is always an error, whatever scaling
// was asked for: no sane patch is that loud, so something in it is wrong.
#pragma once

#include <span>
#include <string>

namespace wane::cli {

inline constexpr double max_over_full_scale_db = 40.0;

/// Largest |sample|; NaN when any sample is NaN (so a broken render cannot hide).
double peak_abs(std::span<const float> samples);

/// Throws std::runtime_error "<what>: the render would peak at +238.80 dBFS, more than 40 dB over
/// full scale; check ..." when peak (a linear amplitude) is over the rule or not finite.
void refuse_too_loud(double peak, const std::string& what);

/// "+1.25 dBFS" for a linear amplitude.
std::string dbfs_text(double amp);

}  // namespace wane::cli

// The residual's updates of the attack search (analysis/onset_attack.cpp: choose_attacks): a mode's
// part added to or taken off a residual sample by sample, and the residual times the mode's phasor,
// on chains of damped phasors re-anchored from their exact powers every 512 samples, four 512-sample
// blocks side by side in vector lanes.
#pragma once

#include <array>
#include <complex>
#include <vector>

#include "modes/damped_mode.hpp"
#include "modes/mode_shape.hpp"

namespace wane {

/// Adds sign * Re(amp a[n] exp(i omega n)) for n in [0, out.size()) to out (m.amp, omega = 2 pi
/// m.freq_hz / sample_rate_hz); a is the mode's shape (exp(-d n / fs) when empty), its samples made
/// in scratch where it is not one plain exponential. With demod, out[n] exp(i omega n) (the sum
/// times the same phasor) into (*demod)[n] as well (demod->size() == out.size()).
void add_mode_part(const damped_mode& m, const mode_shape& shape, double sample_rate_hz, double sign,
                   std::vector<double>& out, std::vector<double>& scratch, std::vector<std::complex<double>>* demod = nullptr);

/// add_mode_part of `gone` (sign -1), then of `next` (sign +1, demodulated into demod) in one
/// pass over out: each sample's two additions in that order, the same sums as the two calls.
void swap_mode_parts(const damped_mode& gone, const mode_shape& gone_shape, const damped_mode& next, const mode_shape& next_shape,
                     double sample_rate_hz, std::vector<double>& out, std::array<std::vector<double>, 2>& scratch,
                     std::vector<std::complex<double>>& demod);

}  // namespace wane

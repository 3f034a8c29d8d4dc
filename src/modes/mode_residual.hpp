// What a fit of modes leaves of a signal, sample by sample, and the modes themselves as samples:
// a mode found by a search is judged against what the signal holds in its band once the other
// fitted modes are taken off (analysis/onset_refine.cpp), not against the whole signal there.
#pragma once

#include <span>
#include <vector>

#include "modes/damped_mode.hpp"
#include "modes/mode_shape.hpp"
#include "modes/narrowband.hpp"

namespace wane {

/// Adds gain * Re(amp a[n] exp(i 2 pi f n / fs)) to out[n] for n in [0, out.size()): a[n] the
/// mode's shape (modes/mode_shape.hpp; empty: exp(-d n / fs), the plain damped mode); scratch
/// holds a shape's samples (reused from call to call).
void add_mode_samples(std::span<double> out, double sample_rate_hz, const damped_mode& m, const mode_shape& shape,
                      double gain, std::vector<double>& scratch);

/// out[n] -= Re(amp_k a_k[n] exp(i 2 pi f_k n / fs)) for every mode k, n in [0, out.size()): the
/// plain modes (shapes[k] empty: a_k[n] = exp(-d_k n / fs)) as one matrix product over blocks of
/// samples (fit_residual's arithmetic, below), the shaped ones by add_mode_samples.
/// shapes.size() == modes.size().
void subtract_fitted_modes(std::span<double> out, double sample_rate_hz, std::span<const damped_mode> modes,
                           std::span<const mode_shape> shapes);

/// x[n] minus every mode (its amp as fitted, with its shape), n in [0, x.size()): the residual
/// of a fit (modes/damped_mode.hpp), summed in double. shapes.size() == modes.size().
std::vector<float> fit_residual(std::span<const float> x, double sample_rate_hz, std::span<const damped_mode> modes,
                                        std::span<const mode_shape> shapes);

/// Energies between low_hz and high_hz (as note_spectrum::energy_between counts them, Parseval).
struct band_energies {
    double left = 0.0;  ///< residual plus the mode m: what the band holds once every other fitted mode is off
    double mode = 0.0;  ///< the mode m alone
};

/// The band's energies of residual_spectrum's signal (count samples, x[0] at n = 0) plus the plain
/// mode m over those samples, and of m alone; m's DFT bins in closed form (geometric series).
band_energies band_energy_left(const note_spectrum& residual_spectrum, std::size_t count, double sample_rate_hz,
                               const damped_mode& m, double low_hz, double high_hz);

}  // namespace wane

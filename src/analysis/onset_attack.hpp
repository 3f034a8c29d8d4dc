// Attack times of the partials at the onset, chosen on the waveform. The waveform fit of the
// onset (analysis/onset_refine.hpp) starts every partial at once; where the recording builds a
// partial up (a bar's resonator, a section of strings plucked a little apart, a hammer's contact)
// an instant start puts the partial's full level where the recording still rises, and the fit pays
// for it with modes that cancel it. Here each strong partial may rise linearly to its peak over
// one of a few attack times (the patch's attack_s), chosen by least squares on the waveform.
#pragma once

#include <span>
#include <vector>

#include "modes/damped_mode.hpp"
#include "modes/mode_shape.hpp"

namespace wane {

struct onset_attack_params {
    /// Attack times tried for each partial, seconds (0, the instant start, is always tried).
    std::vector<double> attack_grid_s{0.001, 0.002, 0.004, 0.007, 0.012, 0.02, 0.032, 0.05};
    /// Only partials whose energy over the span is within this of the strongest's are searched ...
    double range_db = 30.0;
    /// ... at most this many, strongest first.
    std::size_t max_partials = 32;
    /// An attack is taken when it lowers the residual energy of the span by at least this share of
    /// the signal's energy (a rise that explains nothing stays instant).
    double min_gain_share = 0.002;
};

/// The shape of a mode that rises linearly from 0 over attack_n samples to 1, then decays by a
/// factor exp(rho) per sample, over count samples (attack_n = 0: exp(rho n)).
mode_shape rise_decay_shape(std::size_t attack_n, double rho, std::size_t count);

/// One coordinate pass over the searched modes (indices in `may_rise`, each fitted with its decay
/// in modes[i].decay_per_s): with the other modes as fitted, the attack time from the grid (or 0)
/// whose best complex amplitude leaves the least residual of target. Returns the chosen attack
/// in samples per mode (0 for the modes not searched or that stay instant); attack_n gives the
/// current choice. modes, shapes: as fitted on target (shapes[i] empty = exponential); energy:
/// each mode's energy over the span (orders the search).
std::vector<std::size_t> choose_attacks(std::span<const float> target, double sample_rate_hz,
                                        std::span<const damped_mode> modes, std::span<const mode_shape> shapes,
                                        std::span<const double> energy, std::span<const std::size_t> may_rise, std::span<const std::size_t> attack_n,
                                        const onset_attack_params& params);

}  // namespace wane

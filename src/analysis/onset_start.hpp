// The start of a note's modes at sample resolution (analysis/onset_refine.hpp, max_start_shift_s):
// the least-squares start of damped exponentials on the waveform.
#pragma once

#include <cstddef>
#include <span>

#include "core/patch.hpp"
#include "modes/damped_mode.hpp"

namespace wane {

struct modes_start_params {
    double max_shift_s = 0.005;        ///< the start is searched in [0, max_shift_s] after note[0]
    std::size_t rising_partials = 8;   ///< this many of the strongest partials may swell ...
    double rise_decay_per_s = 46.0;    ///< ... with a companion of this decay (1/s)
    /// The first waveform fit's system (analysis/onset_refine): plain modes over fit_n, those of
    /// the partials in fitted_partials (ascending, each with its early decay) then the new modes.
    /// When given, the search takes those modes first and extends this factor
    /// (sliding_fit_params::leading) instead of factoring its Gram matrix anew.
    const plain_gram_factor* first_fit = nullptr;
    std::span<const std::size_t> fitted_partials{};
};

/// The first waveform fit's system (modes_start_params::first_fit): plain modes over fit_n, those
/// of the partials in `fitted` (each with its early decay) then the new modes.
plain_gram_factor first_fit_factor(const patch& p, std::span<const std::size_t> fitted, std::span<const double> decay,
                                   std::span<const damped_mode> new_modes, double sample_rate_hz, std::size_t fit_n);

/// Samples from note[0] to the start of the modes (analysis/onset_refine.hpp, max_start_shift_s):
/// every partial below Nyquist (its early decay) and the new modes as plain damped exponentials;
/// the cost of a start s is the energy of note[0, s) (silent in the patch) plus the residual of
/// the least-squares fit on note[s, s + fit_n) (modes/damped_mode.hpp, sliding_fit_residuals).
std::size_t modes_start(const patch& p, std::span<const float> note, double sample_rate_hz, std::size_t fit_n,
                        std::span<const double> decay, std::span<const damped_mode> new_modes,
                        const modes_start_params& params);

}  // namespace wane

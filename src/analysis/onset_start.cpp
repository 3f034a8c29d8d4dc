#include "analysis/onset_start.hpp"

#include <algorithm>
#include <functional>
#include <utility>
#include <vector>

namespace wane {

plain_gram_factor first_fit_factor(const patch& p, std::span<const std::size_t> fitted, std::span<const double> decay,
                                   std::span<const damped_mode> new_modes, double sample_rate_hz, std::size_t fit_n) {
    std::vector<damped_mode> modes;
    for (const std::size_t k : fitted) modes.push_back({.freq_hz = p.partials[k].freq_hz, .decay_per_s = decay[k]});
    modes.insert(modes.end(), new_modes.begin(), new_modes.end());
    return factor_plain_gram(modes, sample_rate_hz, fit_n);
}

/// Samples from note[0] to the start of the modes (analysis/onset_refine.hpp, max_start_shift_s):
/// every partial below Nyquist (its early decay) and the new modes as plain damped exponentials;
/// the cost of a start s is the energy of note[0, s) (silent in the patch) plus the residual of
/// the least-squares fit on note[s, s + fit_n) (modes/damped_mode.hpp, sliding_fit_residuals).
std::size_t modes_start(const patch& p, std::span<const float> note, double sample_rate_hz, std::size_t fit_n,
                        std::span<const double> decay, std::span<const damped_mode> new_modes,
                        const modes_start_params& params) {
    const auto wanted = static_cast<std::size_t>(params.max_shift_s * sample_rate_hz);
    const std::size_t max_shift = std::min(wanted, note.size() - fit_n);
    if (max_shift == 0) return 0;
    std::vector<damped_mode> modes;
    std::vector<bool> placed(p.partials.size(), false);
    // The first fit's modes lead (the least squares do not depend on the modes' order).
    if (params.first_fit != nullptr) {
        for (const std::size_t k : params.fitted_partials) {
            modes.push_back({.freq_hz = p.partials[k].freq_hz, .decay_per_s = decay[k]});
            placed[k] = true;
        }
        modes.insert(modes.end(), new_modes.begin(), new_modes.end());
    }
    std::vector<std::pair<double, std::size_t>> loudest;
    for (std::size_t k = 0; k < p.partials.size(); ++k) {
        if (p.partials[k].freq_hz >= 0.5 * sample_rate_hz) continue;
        if (!placed[k]) modes.push_back({.freq_hz = p.partials[k].freq_hz, .decay_per_s = decay[k]});
        loudest.emplace_back(p.partials[k].env.peak.db, k);
    }
    // The strongest partials may build up (analysis/onset_attack.hpp): each gets a companion at its
    // frequency that dies within the rise, so that the pair can start quietly and swell; with plain
    // exponentials alone a later start would look better wherever a partial rises.
    std::sort(loudest.begin(), loudest.end(), std::greater<>());
    for (std::size_t r = 0; r < loudest.size() && r < params.rising_partials; ++r)
        modes.push_back({.freq_hz = p.partials[loudest[r].second].freq_hz, .decay_per_s = params.rise_decay_per_s});
    if (params.first_fit == nullptr) modes.insert(modes.end(), new_modes.begin(), new_modes.end());
    const std::vector<double> residual = sliding_fit_residuals(note, sample_rate_hz, modes, fit_n, max_shift + 1,
                                                               {.skip_dominated = true, .leading = params.first_fit});
    std::size_t best = 0;
    double before = 0.0, best_cost = residual[0];
    for (std::size_t s = 1; s <= max_shift; ++s) {
        before += double(note[s - 1]) * double(note[s - 1]);
        if (before + residual[s] < best_cost) best_cost = before + residual[s], best = s;
    }
    return best;
}

}  // namespace wane

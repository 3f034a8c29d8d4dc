// Attack times of the partials at the onset, chosen on the waveform. The waveform fit of the
// onset (analysis/onset_refine.hpp) starts every partial at once; where the recording builds a
// partial up (a bar's resonator, a section of strings plucked a little apart, a hammer's contact)
// an instant start puts the partial's full level where the recording still rises, and the fit pays
// for it with modes that cancel it. Here each strong partial may rise linearly to its peak over
// one of a few attack times (the patch's attack_s), chosen by least squares on the waveform.
#pragma once

#include <complex>
#include <cstdint>
#include <map>
#include <span>
#include <tuple>
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
    /// Instant starts that rise: tried for this many of the strongest searched partials, with these
    /// start ratios (amplitude at t = 0 over the level the rise reaches) and rise times.
    std::size_t max_rising_partials = 8;
    std::vector<double> start_ratios{0.1, 0.2, 0.35, 0.5};
    std::vector<double> rise_grid_s{0.007, 0.012, 0.02, 0.032, 0.05, 0.08, 0.12};
};

/// How a partial starts: at once (rise_n = 0), rising linearly from silence over rise_n samples
/// (start_ratio = 0: the patch's attack_s), or sounding at once at start_ratio of its level at
/// rise_n and rising to it (a struck bar whose resonator builds the tone up over the strike's own
/// sound). That rise follows the linear ramp c + (1 - c) n / rise_n (c = start_ratio) through
/// its rise_segments + 1 knots (n = k rise_n / rise_segments), straight in dB between them, as
/// the patch renders them (negative t60_s).
struct attack_choice {
    std::size_t rise_n = 0;
    double start_ratio = 0.0;
    bool operator==(const attack_choice&) const = default;
};
inline constexpr int rise_segments = 4;

/// Sample of knot k (0 .. rise_segments) of a rise over rise_n samples, and the ramp's value there.
std::size_t rise_knot(std::size_t rise_n, int k);
double rise_knot_ratio(double start_ratio, int k);

/// The shape of a mode that rises linearly from 0 over attack_n samples to 1, then decays by a
/// factor exp(rho) per sample, over count samples (attack_n = 0: exp(rho n)).
mode_shape rise_decay_shape(std::size_t attack_n, double rho, std::size_t count);

/// The shape of a mode with the start `choice`, 1 at its rise's end, then decaying by exp(rho) per
/// sample, over count samples.
mode_shape attack_shape(const attack_choice& choice, double rho, std::size_t count);

/// target minus every mode (its amp as fitted, with its shape; shapes[i] empty = exponential),
/// sample by sample in double: the residual of the joint fit that choose_attacks starts from.
std::vector<double> joint_residual(std::span<const float> target, double sample_rate_hz,
                                   std::span<const damped_mode> modes, std::span<const mode_shape> shapes);

/// The closed-form Gram sums of the attack shapes tried on a mode (sum a^2 exp(2 i omega n) and
/// sum a^2 over the span), kept between choose_attacks calls on the same span: they depend on the
/// shape (its choice, the mode's decay per sample, the span's count) and omega only, and the onset
/// refinement's passes try the same shapes on the same partials again (analysis/onset_refine.cpp).
/// The numbers kept are the ones computed, so a search with the memo chooses as one without.
struct attack_gram_memo {
    struct sums {
        std::complex<double> s_pq;  ///< sum a[n]^2 exp(2 i omega n)
        double s_pcq = 0.0;         ///< sum a[n]^2
    };
    /// (omega, rho, count, rise_n, start_ratio) -> sums; the doubles by their bits.
    std::map<std::tuple<std::uint64_t, std::uint64_t, std::size_t, std::size_t, std::uint64_t>, sums> kept;
};

/// One coordinate pass over the searched modes (indices in `may_rise`, each fitted with its decay
/// in modes[i].decay_per_s): with the other modes as fitted, the attack time from the grid (or 0)
/// whose best complex amplitude leaves the least residual of target, or for the strongest
/// max_rising_partials of those also in may_swell (where the recording shows a rise) an instant
/// start that rises (attack_choice). Returns the choice per mode
/// (instant for the modes not searched or that stay so); current gives the current choice. modes, shapes: as fitted on target (shapes[i] empty = exponential); energy:
/// each mode's energy over the span (orders the search). joint: joint_residual(target, ..,
/// modes, shapes) when the caller has it (empty: computed here). memo: the shapes' Gram sums kept
/// from earlier calls on the same span (attack_gram_memo), or none.
std::vector<attack_choice> choose_attacks(std::span<const float> target, double sample_rate_hz,
                                          std::span<const damped_mode> modes, std::span<const mode_shape> shapes,
                                          std::span<const double> energy, std::span<const std::size_t> may_rise,
                                          std::span<const std::size_t> may_swell, std::span<const attack_choice> current,
                                          const onset_attack_params& params, std::span<const double> joint = {},
                                          attack_gram_memo* memo = nullptr);

}  // namespace wane

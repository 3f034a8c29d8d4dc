// What one least-squares fit of modes (fit_shaped_amplitudes, modes/damped_mode.hpp) computed,
// kept for the next fit over the same span. The onset refinement's passes refit mostly the modes
// of the pass before (some dropped, some given a shape, the rest unchanged), so the next fit
// copies the Gram entries of the mode pairs it shares with the last one and the projections of
// the modes it shares on the same samples instead of computing them again. Copied, not
// approximated: an entry is taken over only where the fit would compute it from the same inputs
// in the same order, so a fit with the memo gives the same numbers as one without.
#pragma once

#include <cstddef>
#include <span>
#include <vector>

#include "modes/mode_shape.hpp"

namespace wane {

struct shaped_fit_memo {
    std::size_t count = 0;        ///< samples fitted (0: nothing kept)
    double sample_rate_hz = 0.0;
    std::vector<float> x;         ///< the samples the projections were taken on
    std::vector<mode_shape> own;  ///< each mode's shape as the fit used it (an exponential when none was given)
    std::vector<double> omega;    ///< each mode's angular frequency, rad per sample
    std::vector<char> plain;      ///< 1: no shape given (projected as a damped phasor)
    std::vector<double> gram;     ///< 2G x 2G, column-major, without the ridge: the first G = gram_modes modes
    std::vector<double> rhs;      ///< 2K: the projections on x (real columns, as the fit orders them)
    /// The leading modes whose Gram entries `gram` holds (a fit keeps all of its own); the modes
    /// after them (add_projections) lend only their projections.
    std::size_t gram_modes = 0;
};

/// For each mode of a new fit (shape own[k], omega[k], plain[k]) the index of the same mode in the
/// memo (the same plainness, omega and shape pieces, bit for bit), or -1; all -1 when the count or
/// the rate differ or nothing is kept.
std::vector<std::ptrdiff_t> memo_matches(const shaped_fit_memo& memo, std::span<const mode_shape> own,
                                         std::span<const double> omega, std::span<const char> plain,
                                         std::size_t count, double sample_rate_hz);

/// True when the memo's projections were taken on exactly these samples.
bool memo_same_samples(const shaped_fit_memo& memo, std::span<const float> x);

/// old_of (memo_matches) with -1 for the modes whose Gram entries the memo does not hold (at or
/// past its gram_modes).
std::vector<std::ptrdiff_t> gram_matches(const shaped_fit_memo& memo, std::span<const std::ptrdiff_t> old_of);

/// Appends to `to` the modes of `from` it lacks (memo_matches), with their projections and no
/// Gram entries (an empty `to` takes from's count and rate first, and keeps no samples); nothing
/// when the counts or rates differ. The samples are not compared: the caller makes sure that both
/// hold projections on the same ones. Several fits on one signal (the early companions'
/// candidates: the same companion beside two shapes of a partial) so share every projection any
/// of them made, not only the last fit's.
void add_projections(shaped_fit_memo& to, const shaped_fit_memo& from);

/// The old Gram matrix's entries a fill may copy: mode k of the new fit is mode old_of[k] of the
/// old (or -1). A pair j <= k is copied only when both are there in the same order (j < k with
/// old_of[j] < old_of[k]): as the old fill computed it, not relying on the rounding of the pair
/// sums being symmetric in their two modes.
struct gram_reuse {
    std::span<const std::ptrdiff_t> old_of;
    const double* old = nullptr;  ///< column-major, old_dim x old_dim
    std::size_t old_dim = 0;

    bool copies(std::size_t j, std::size_t k) const {
        const std::ptrdiff_t a = old_of[j], b = old_of[k];
        return a >= 0 && b >= 0 && (j == k || a < b);
    }
    /// Entry (row, col) of the old matrix.
    double at(std::ptrdiff_t row, std::ptrdiff_t col) const {
        return old[static_cast<std::size_t>(col) * old_dim + static_cast<std::size_t>(row)];
    }
};

}  // namespace wane

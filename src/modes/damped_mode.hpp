// Damped complex exponentials ("modes") and their complex amplitudes by least squares on the
// waveform: the onset of a note in the time domain, where an STFT frame cannot see it.
//
// A mode k is  x_k(t) = Re( amp_k * exp((-decay_k + i 2 pi f_k) t) ),  t in seconds from the
// note's onset, so |amp_k| is its amplitude at t = 0 (1 = a full-scale sinusoid, the patch's
// 0 dBFS), arg(amp_k) the phase of cos(2 pi f t + phase), and T60 = ln(1000) / decay_k.
#pragma once

#include <complex>
#include <optional>
#include <span>
#include <vector>

#include "modes/fit_memo.hpp"
#include "modes/mode_shape.hpp"

namespace wane {

struct damped_mode {
    double freq_hz = 0.0;
    double decay_per_s = 0.0;      ///< d of exp(-d t), 1/s; T60 = ln1000 / d (0 holds the level)
    std::complex<double> amp{};    ///< complex amplitude at t = 0
};

/// Sum over n = 0 .. count-1 of exp(n a), a complex (the geometric series of z = exp(a)), computed
/// as expm1(count a) / expm1(a) so that it stays exact as |a| -> 0 (then it tends to count).
std::complex<double> geometric_sum(std::complex<double> a, double count);

/// exp(a) - 1, without cancellation for small |a|.
std::complex<double> complex_expm1(std::complex<double> a);

/// Least-squares complex amplitudes of the modes (their freq_hz and decay_per_s given) on
/// x[0 .. x.size()), sampled at sample_rate_hz, x[0] at t = 0: minimizes
///   sum_n ( x[n] - sum_k Re(amp_k z_k^n) )^2,   z_k = exp((-d_k + i 2 pi f_k) / fs),
/// over the 2K real unknowns (Re, Im of each amp). The Gram matrix has a closed form for every pair
/// (geometric series, geometric_sum), so it costs O(K^2) whatever the length; the projections cost
/// O(K N). A ridge of ridge_rel times the mean diagonal keeps near-equal modes solvable.
/// Writes amp into every mode; returns the residual energy over the signal energy (0..1; 1 when
/// x is all zero). Preconditions (asserted): sample_rate_hz > 0, every freq in [0, fs/2].
double fit_mode_amplitudes(std::span<const float> x, double sample_rate_hz, std::span<damped_mode> modes,
                           double ridge_rel = 1e-9);

/// fit_mode_amplitudes of every set present (each on the whole of x): every set's modes projected
/// on x in one pass (project_modes, each mode's arithmetic as alone), each set then solved with the
/// factor of its closed-form Gram matrix (factor_plain_gram: fit_mode_amplitudes's ridge and
/// Cholesky steps). For the several model orders of one band (analysis/mode_split.cpp).
void fit_mode_amplitude_sets(std::span<const float> x, double sample_rate_hz,
                             std::span<std::optional<std::vector<damped_mode>>> sets);

/// The least-squares system of plain damped modes over `count` samples as fit_mode_amplitudes
/// builds it (the Gram matrix, and the Cholesky factor of it with the ridge added), kept so that a
/// fit of the same modes over the same count (fit_shaped_amplitudes) solves with it and a search
/// over these modes and more (sliding_fit_residuals) extends it instead of factoring anew.
struct plain_gram_factor {
    std::vector<damped_mode> modes;  ///< freq_hz and decay_per_s of each (amp unused)
    std::size_t count = 0;
    double sample_rate_hz = 0.0;
    double ridge_rel = 0.0;
    double ridge = 0.0;              ///< ridge_rel times the Gram matrix's mean diagonal
    std::vector<double> gram;        ///< 2K x 2K, column-major, without the ridge
    std::vector<double> lower;       ///< the ridged matrix's Cholesky factor in its lower triangle; empty when it failed
};
plain_gram_factor factor_plain_gram(std::span<const damped_mode> modes, double sample_rate_hz, std::size_t count,
                                    double ridge_rel = 1e-9);

/// The same fit where mode k may have a shape of its own instead of exp(-d t): when shapes[k] is
/// not empty it gives the real amplitude a_k[n] (modes/mode_shape.hpp; every piece within
/// [0, x.size())), and the mode is Re(amp_k a_k[n] exp(i 2 pi f_k n / fs)) (decay ignored), so
/// amp_k scales the shape. The Gram matrix stays closed-form (pieces); shapes.size() == modes.size().
/// With `known` given for exactly these modes (every shape empty, the same freq_hz and decay_per_s,
/// count x.size(), rate and ridge_rel), its factor is used: the same numbers as without. With a
/// memo, the Gram entries and projections of the modes this fit shares with the memo's fit are
/// copied from it (the same numbers as computed), and the memo then holds this fit's: a `known`
/// factor used then gives its Gram matrix to the memo (known->gram is left empty, not copied).
double fit_shaped_amplitudes(std::span<const float> x, double sample_rate_hz, std::span<damped_mode> modes,
                             std::span<const mode_shape> shapes, double ridge_rel = 1e-9,
                             plain_gram_factor* known = nullptr, shaped_fit_memo* memo = nullptr);

struct sliding_fit_params {
    double ridge_rel = 1e-9;
    /// The caller minimizes |x[0, s)|^2 + out[s] over s (the samples before a start are left
    /// unexplained): starts are solved in blocks of 32 in order, and once |x[0, s)|^2 alone reaches
    /// the least such cost found so far no later start can be less, so those are not solved
    /// (out = +infinity). The starts solved get the same values as without.
    bool skip_dominated = false;
    /// When its modes are the first of the search's (the same freq_hz and decay_per_s, count and
    /// rate), its factor is extended by the other modes' rows instead of factoring all anew; the
    /// ridge is then its own (its ridge_rel times the mean diagonal of its modes' Gram matrix).
    const plain_gram_factor* leading = nullptr;
};

/// Residual energy of the least-squares fit of the modes (plain damped exponentials, their freq_hz
/// and decay_per_s given, each starting at the span's start) on x[s, s + count) for every start s
/// in [0, starts): out[s]. The Gram matrix depends on count only, so it is factored once; the
/// projections slide one sample at a time, P_k(s + 1) = (P_k(s) - x[s] + x[s + count] z_k^count) / z_k,
/// and are recomputed exactly every 128 starts. Each start then costs one triangular solve:
/// residual = |x_s|^2 - |L^-1 P(s)|^2 (L the Cholesky factor of the ridged Gram matrix, ridge as
/// in fit_mode_amplitudes). Preconditions (asserted): x.size() + 1 >= starts + count, count > 0,
/// every freq in [0, fs/2].
std::vector<double> sliding_fit_residuals(std::span<const float> x, double sample_rate_hz,
                                          std::span<const damped_mode> modes, std::size_t count, std::size_t starts,
                                          const sliding_fit_params& params = {});

}  // namespace wane

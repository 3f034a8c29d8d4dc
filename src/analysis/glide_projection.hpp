// The block sums behind the onset glide search (analysis/onset_glide.hpp, internal to it): the
// signal heterodyned by the partial's frequency, summed over blocks with a flat and with the
// partial's envelope weight, and S(c0, tau) from those sums for one glide, where a bound on what
// the blocks left can add stops a candidate early once it cannot reach a given floor.
#pragma once

#include <complex>
#include <cstddef>
#include <optional>
#include <span>
#include <vector>

#include "core/patch.hpp"

namespace wane::glide_projection {

/// The block sums of z[n] = y[n] a[n] e^(-j 2 pi f n / fs) and of (n - centre) z[n].
struct block_sums {
    std::vector<std::complex<double>> z;
    std::vector<std::complex<double>> z1;
    std::vector<double> centre_s;
    double amp_energy = 0.0;  ///< D = sum a^2
    /// sum_b 2 |Z_b|^2 / block: with a = 1, the energy y holds within about a block's inverse of f
    /// (each block's sum is a boxcar filter at f, first null 1 / block_s away).
    double band_energy = 0.0;
    /// tail_z[b] = sum_{b' >= b} |Z_b'|, tail_z1 the same of |Z1_b'| (count + 1 each; made for
    /// the flat and the merged sums): the bound by which a candidate is rejected early.
    std::vector<double> tail_z;
    std::vector<double> tail_z1;
    /// tail_sum[b] = sum_{b' >= b} Z_b' (count + 1; made with the tail sums): the rest of the
    /// no-glide sum, which a candidate's rest approaches where its glide has settled.
    std::vector<std::complex<double>> tail_sum;
    std::vector<double> abs_z;   ///< |Z_b| (made with the tail sums)
    std::vector<double> abs_z1;  ///< |Z1_b|
};

/// Sums of the blocks left weighted by one time constant's decay (count + 1 each, like the tail
/// sums): z[b] = sum_{b' >= b} decay[b'] |Z_b'|, z1 the same of |Z1_b'|. They bound what a glide
/// of that time constant still turns the blocks left by (evaluate_above's settled bound).
struct decay_tails {
    std::vector<double> z;
    std::vector<double> z1;
};

/// s's decay tails for decay[b] = e^(-t_b / tau) at its blocks' centres.
decay_tails tails_at(const block_sums& s, std::span<const double> decay);
/// The same into out, whose buffers are reused (nothing allocated when they are long enough).
void tails_into(const block_sums& s, std::span<const double> decay, decay_tails& out);

/// z[n] = y[n] e^(-j 2 pi f n / fs), kept per sample for the flat and the shaped sums.
struct heterodyned {
    std::vector<double> re;
    std::vector<double> im;
};

/// y heterodyned by freq_hz (freq_hz / rate_hz in [0, 0.5]).
heterodyned heterodyne(std::span<const double> y, double freq_hz, double rate_hz);
/// The same into z, whose buffers are reused (resized to y's length: nothing is allocated or
/// cleared when they have it already).
void heterodyne_into(std::span<const double> y, double freq_hz, double rate_hz, heterodyned& z);

/// The block sums with a = 1 (flat), from z, with their tail sums.
block_sums sum_flat(const heterodyned& z, double rate_hz, std::size_t block);

/// The block sums with a = q's envelope amplitude times gain_lin (shaped), from z.
block_sums sum_shaped(const heterodyned& z, const partial& q, double gain_lin, double rate_hz, std::size_t block);

/// The block sums of blocks twice as long (pairs merged, Z1 moved to the pair's centre), with
/// their tail sums: the coarse search's, where the glide's second-order term may be 4 times the
/// fine blocks'.
block_sums merged_pairs(const block_sums& s, double rate_hz);

/// The glide's terms at the blocks' centres for one (c0, tau), per hertz of f where they scale
/// with it: R(t_b) / f and G / f (core/glide.hpp's R at decay e^(-t_b / tau), linear in f) and the
/// frequency excess f(t_b) / f - 1. decay[b] = e^(-t_b / tau).
struct glide_terms {
    double cents = 0.0;
    double glide_s = 0.0;
    double whole_rad_per_hz = 0.0;
    std::vector<double> remaining_rad_per_hz;
    std::vector<double> excess;
    /// Terms made lazily (the fine grid's, most of whose candidates the bound rejects early):
    /// the first `filled` blocks' are made, the rest come from decay as the sum reaches them.
    std::span<const double> decay{};
    std::size_t filled = 0;
    /// expm1(|cents| ln2 / 1200), the settled bound's largest excess (evaluate_above), made as the
    /// first sum needs it and kept with the terms (a coarse point's for every partial); < 0: not
    /// made yet (set it back with cents).
    double excess_bound = -1.0;
};

/// glide_terms::excess_bound of an offset: expm1(|cents| ln2 / 1200).
double excess_bound_at(double cents);

/// The terms of (cents, glide_s) at every decay, made whole.
glide_terms terms_at(double cents, double glide_s, std::span<const double> decay);

/// e^(-t_b / tau) at the blocks' centres.
std::vector<double> decays(const block_sums& s, double glide_s);

struct glide_fit {
    double cents = 0.0;
    double glide_s = 0.0;
    double explained = 0.0;        ///< E = 2 |S|^2 / D
    std::complex<double> amp{};    ///< C = 2 S / D
};

/// The fit at t, or none when it explains less than floor_explained: the blocks are summed in
/// order 8 at a time, and before the first and after each stretch |S| <= |sum so far| + sum over
/// the blocks left of (|Z_b| + |g'_b| |Z1_b|) (|g'_b| at most its value at the first block left:
/// the excess shrinks with the decay), padded by 1e-9; the tail sums are made once per partial.
/// With tails (t's time constant's, tails_at) also the settled bound, whichever is lower:
/// g_b = G - R_b (G = f whole_rad_per_hz, R_b = f remaining_rad_per_hz[b]), so the blocks left
/// add e^(-j G) sum_b e^(j R_b) (Z_b - j g'_b Z1_b), and |S| <= |sum so far + e^(-j G)
/// tail_sum| + sum over the blocks left of (|R_b| |Z_b| + |g'_b| |Z1_b|) (|e^(j R) - 1| <= |R|),
/// where |R_b| <= 2 pi f tau expm1(|x0|) decay_b and |g'_b| <= 2 pi f / fs expm1(|x0|) decay_b
/// (|Ein(u)| and |expm1(u)| are at most expm1(|u|), and expm1(|x0| d) <= d expm1(|x0|) for
/// 0 <= d <= 1: convexity), padded by 1e-9 of the blocks' whole magnitude (the first bound's):
/// near the whole sum once the glide has settled. Lazy terms are made as the sum reaches their
/// blocks.
std::optional<glide_fit> evaluate_above(const block_sums& s, double freq_hz, glide_terms& t, double rate_hz,
                                        double floor_explained, const decay_tails* tails = nullptr);

/// The fit at t (summed whole).
glide_fit evaluate(const block_sums& s, double freq_hz, glide_terms& t, double rate_hz);

/// The fit at (cents, glide_s); cents = 0: no glide.
glide_fit evaluate(const block_sums& s, double freq_hz, double cents, double glide_s, double rate_hz);

}  // namespace wane::glide_projection

// A patch between two recorded notes: the patch for a key (or a velocity) that lies between two
// roots, made by interpolating their parameters, so timbre and decay change smoothly across the
// keyboard instead of jumping at zone borders.
//
// interpolate_patches(a, b, w, root_hz): w = 0 is a, w = 1 is b (the weight of b).
// Matching partials: for two harmonic patches (both have partials with harmonic numbers) by
// harmonic number; otherwise (bars, bells, tines) by frequency ratio to the root, the nearest in
// log frequency within match_tolerance_cents, each partial used once, strongest first.
// Per matched pair (x_a, x_b the two values):
//   frequency  f = root_hz * r, r = exp((1 - w) ln r_a + w ln r_b), r_x = f_x / root_x; for harmonic
//              partials r_x = n sqrt(1 + B_x n^2) d_x and the series part uses B = exp((1 - w) ln B_a
//              + w ln B_b) (B in log; linear when either B is 0), d (the partial's own offset from
//              its series) in log;
//   peak_db    (1 - w) a + w b (levels in dB); the patches' gain_db folded into the levels;
//   attack_s   in log time;
//   decay      times after each envelope's own attack end; when both have as many segments and
//              all of them decay: segment by segment, T60 in log time exp((1 - w) ln T60_a +
//              w ln T60_b), segment ends linear; otherwise (other counts, a hold or a rise) the
//              two level lines interpolated in dB at every breakpoint of either, each piece's T60
//              from the interpolated line's slope (so no level leaves the range of the two);
//   phase      of the nearer root (w < 0.5: a);
//   glide      as blend_glide (transform/blend.hpp) does: cents linear, time constant in log.
// A partial present in one root only keeps its ratio and fades across the interval: its
// amplitude is scaled by that root's weight (1 - w for a, w for b), i.e. peak_db + 20 log10(weight);
// at weight 0 it is left out. Noise bands likewise, matched by band centre within
// band_match_tolerance_octaves (edges in log frequency).
// The result's root is root_hz (note.root moved there, f0_hz by its ratio to the root interpolated
// in log), its length the longer of the two.
#pragma once

#include "core/patch.hpp"

namespace wane {

/// Partials of inharmonic notes match when their ratios to the root differ by less than this
/// (our choice, no source: a quarter tone, well under the spacing of a bar's or bell's modes).
inline constexpr double match_tolerance_cents = 50.0;
/// Noise bands match when their centres differ by less than this (our choice: a third octave,
/// under the octave spacing of the analysis's bands).
inline constexpr double band_match_tolerance_octaves = 1.0 / 3.0;

/// The interpolation described above. Preconditions: both patches pitched (root_hz > 0),
/// 0 <= weight_b <= 1, root_hz > 0.
patch interpolate_patches(const patch& a, const patch& b, double weight_b, double root_hz);

/// T60 between two T60s (see above): log time for two decays, the decay rate otherwise.
double interpolate_t60_s(double t60_a, double t60_b, double w);

}  // namespace wane

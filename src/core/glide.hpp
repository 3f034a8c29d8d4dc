// A partial's early pitch glide (patch keys glide_cents and glide_s, format version 4): the strike
// or pluck raises the tension, so a partial starts off its long-term frequency f and settles onto it.
//
// The formula (one home; the renderer, the analysis and the report's inline renderer follow it):
//   offset in cents      c(t) = c0 exp(-t / tau)                 c0 = glide_cents, tau = glide_s
//   frequency            f(t) = f 2^(c(t) / 1200) = f exp(x0 exp(-t / tau)),   x0 = c0 ln(2) / 1200
//   phase                theta(t) = phase + 2 pi f t + 2 pi f int_0^t (f(s) / f - 1) ds
//                                 = phase + 2 pi f t + G - R(t)
//   with the exact integral R(t) = 2 pi f tau Ein(x0 exp(-t / tau)) (the phase still to come) and
//   G = R(0) (the whole glide's phase), Ein(x) = int_0^x (e^s - 1) / s ds = sum_k>=1 x^k / (k k!).
// So the glide is exact (no small-offset form): for |c0| <= 1200 cents |x| <= ln 2, and the series
// summed to k = 16 leaves out terms whose sum is under 1e-18 of Ein's size (|Ein(x)| >= 0.8 |x|
// there; the first term left out, |x|^17 / (17 * 17!), is under 5e-19 |x|): double rounding rules.
//
// Where the glide stops mattering: |R(t)| <= 2 pi f tau |u| e^|u| <= 4 pi f tau |x0| e^(-t / tau)
// (u = x0 e^(-t/tau), e^|u| <= 2). From glide_settled_s on this bound is under
// glide_phase_tolerance_rad, so the renderer plays the partial there with its constant frequency
// and the phase phase + G: the difference to the formula is a phase error under 1e-6 rad, an error
// vector 120 dB under the partial (below the oscillator bank's own float budget, -108 dB).
#pragma once

#include <span>

namespace wane {

/// Limits of the keys (the format's rules): an octave either way, and a glide time constant of at
/// most 2 s (measured strike glides settle in tens of ms; the limit bounds the exact render's span).
inline constexpr double max_abs_glide_cents = 1200.0;
inline constexpr double max_glide_s = 2.0;
/// Phase error allowed where the renderer hands a gliding partial to its constant-frequency path.
inline constexpr double glide_phase_tolerance_rad = 1e-6;

/// Offset in cents at time_s: c0 exp(-t / tau).
double glide_cents_at(double glide_cents, double glide_s, double time_s);

/// R(t): the phase (rad) the glide still adds after time_s (see the header comment); 0 without a
/// glide (glide_cents = 0).
double glide_remaining_phase_rad(double freq_hz, double glide_cents, double glide_s, double time_s);

/// R with the decay factor e^(-t / tau) given instead of t (for a caller that evaluates many
/// offsets at the same instants): 2 pi f tau Ein(x0 decay).
double glide_remaining_phase_at_decay_rad(double freq_hz, double glide_cents, double glide_s, double decay);

/// f(t) / f - 1 = 2^(c(t) / 1200) - 1 = expm1(x0 decay) at the decay factor e^(-t / tau): the
/// frequency excess, so the glide's phase advances by 2 pi f times it per second.
double glide_freq_excess_at_decay(double glide_cents, double decay);

/// Both of the above per hertz of f at many decay factors (a caller evaluating many glides at the
/// same instants): remaining_rad_per_hz[b] = R / f at decay[b], excess[b] = f(t) / f - 1 there.
/// For |x0| <= 1/16 (offsets up to 108 cents; decay <= 1) both come from their series in one
/// loop the compiler vectorizes: Ein's is the one above (the same operations, the same bits), and
/// expm1(x) = sum_{k=1..9} x^k / k! (the first term left out, |x|^10 / 10!, is under 2e-18 |x|),
/// within an ulp or so of the library's expm1. For |x0| <= 1/8 (offsets up to 216 cents) the
/// same loop takes Ein's 16 terms where |x| > 1/16 (as above: the same bits) and expm1 to
/// x^11 / 11! (the rest under 3e-19 |x|). Larger offsets take the functions above.
void glide_terms_at_decays(double glide_cents, double glide_s, std::span<const double> decay,
                           std::span<double> remaining_rad_per_hz, std::span<double> excess);

/// R (rad) at many decay factors (0 < decay <= 1, asserted; the renderer's gliding frames):
/// remaining_rad[b] = 2 pi f tau Ein(x0 decay[b]), the same series as the function above in one loop
/// the compiler vectorizes, its 8 terms for all when |x0| <= 1/16 (offsets up to 108 cents), else
/// its 16 (both within double rounding of Ein, as above).
void glide_remaining_phases_at_decays_rad(double freq_hz, double glide_cents, double glide_s,
                                          std::span<const double> decay, std::span<double> remaining_rad);

/// G = R(0): the whole glide's phase (rad); the settled partial plays at phase + G.
double glide_total_phase_rad(double freq_hz, double glide_cents, double glide_s);

/// theta(t) - (phase + 2 pi f t) = G - R(t): the glide's phase at time_s.
double glide_phase_offset_rad(double freq_hz, double glide_cents, double glide_s, double time_s);

/// Time from which |R(t)| <= glide_phase_tolerance_rad (by the bound in the header comment); 0
/// without a glide.
double glide_settled_s(double freq_hz, double glide_cents, double glide_s);

}  // namespace wane

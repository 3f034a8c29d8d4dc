// Which of the short-lived modes found beside the partials (subband ESPRIT over the note's first
// span, analysis/onset_refine.cpp) join the onset's waveform fit, and which stay in it. A
// candidate is a resonance clear of the partials, found again on a shorter span; after a fit, a
// new mode stays when it explains at least a share of what its band holds once every other
// fitted mode is taken off: the fit's residual there plus the mode itself
// (modes/mode_residual.hpp). Judged against what is left, not against the recording's band, the
// test does not depend on a neighbour's phase.
#pragma once

#include <complex>
#include <cstddef>
#include <span>
#include <vector>

#include "analysis/onset_refine.hpp"
#include "core/patch.hpp"
#include "modes/damped_mode.hpp"
#include "modes/mode_shape.hpp"

namespace wane {

/// Candidate new modes among found: not taken by a partial, clear of every partial (by
/// new_mode_clearance_cells of cluster_hz), decaying, with a T60 in [min_new_t60_s,
/// max_lasting_t60_s] and a quality factor pi f / d of at least min_new_q.
std::vector<damped_mode> new_mode_candidates(const patch& p, std::span<const damped_mode> found,
                                             const std::vector<bool>& taken, double cluster_hz,
                                             const onset_refine_params& params);

/// Candidate new modes whose T60 lies over max_new_t60_s (up to max_lasting_t60_s, chosen by
/// new_mode_candidates) that note (x[0] at the onset, at least 2 span_n samples) shows lasting: the
/// mode's amplitude estimated on [span_n, 2 span_n), along its own decay from n = 0, is within
/// lasting_tolerance_db under the one estimated on [0, span_n) (windowed_amplitude). The shorter-
/// lived candidates pass as they are. Poles that fit a burst of noise on the span find nothing
/// after it; a mode that dies faster than its pole says would ring on in the copy.
std::vector<damped_mode> lasting_modes(std::span<const damped_mode> candidates, std::span<const float> note,
                                       double sample_rate_hz, std::size_t span_n, const onset_refine_params& params);

/// The complex amplitude A of the mode Re(A z^n), z = exp((-d + i 2 pi f) / fs), n counted from
/// note[0], estimated on note[first, first + count) by its Hann-windowed projection:
/// 2 sum w[k] x[n] conj(z^n) / sum w[k] |z^n|^2, n = first + k (the mode's conjugate half left out:
/// f is far from 0 Hz). The window keeps the partials two resolution cells away out of it.
std::complex<double> windowed_amplitude(std::span<const float> note, double sample_rate_hz, const damped_mode& m,
                                        std::size_t first, std::size_t count);
/// The same with the window given (spectrum/window.hpp: make_window(hann, count, symmetric), zero
/// at both ends), made once for many modes.
std::complex<double> windowed_amplitude(std::span<const float> note, double sample_rate_hz, const damped_mode& m,
                                        std::size_t first, std::span<const float> window);

/// For the onset fit's loud starts (onset_refine.cpp): true when the recording holds mode m (a
/// partial's frequency and early decay) at the fitted level0 (dB): its Hann-windowed projection
/// (windowed_amplitude, the neighbours two cells off left out) on target (the fit span, the fixed
/// partials taken off) within loud_heard_db under level0; and the recording goes on at the
/// partial's frequency: its steady projection on note's next fit_n samples falls from the one on
/// the first less than a mode of T60 loud_lasting_t60_s would. A start far louder than the
/// partial's STFT envelope is then the partial's own (its track born late, its first frames' level
/// lost to a neighbour's track or under a dip), not least squares trading amplitude between modes
/// that cancel, nor a short-lived component at the partial's frequency that dies within the span.
bool heard_at_fitted_level(std::span<const float> note, std::span<const float> target, double sample_rate_hz,
                           const damped_mode& m, double level0_db, const onset_refine_params& params);

/// The candidates found again on the shorter span (stable): within stable_freq_cells cells of
/// cluster_hz and stable_decay_rel of their decay.
std::vector<damped_mode> stable_modes(std::span<const damped_mode> candidates, std::span<const damped_mode> again,
                                      double cluster_hz, const onset_refine_params& params);

/// The new modes of a fit that stay: modes[first_new ..] (plain, amplitudes fitted) of the least-
/// squares fit of target (its samples from t = 0) by all of modes with their shapes (empty: plain);
/// energy holds each mode's energy over the span. A mode stays when its energy is within
/// new_mode_range_db of the strongest mode's, it starts no louder than full scale, and its energy
/// in its band (main lobe, half-width max(2 cells, d / pi)) is at least new_mode_share of the
/// band's energy of the fit's residual plus the mode. residual: the fit's residual (target minus
/// every mode, in double) when the caller has it (empty: fit_residual, modes/mode_residual.hpp).
std::vector<damped_mode> kept_new_modes(std::span<const float> target, double sample_rate_hz,
                                        std::span<const damped_mode> modes, std::span<const mode_shape> shapes,
                                        std::span<const double> energy, std::size_t first_new,
                                        const onset_refine_params& params, std::span<const double> residual = {});

}  // namespace wane

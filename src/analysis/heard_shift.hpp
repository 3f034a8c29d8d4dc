// Where a copy's partials are heard: the peak of the Hann-windowed spectrum of the heard span (the
// span analysis/heard_peaks reads the recording over: 0.1-1.1 s after the onset, pitch/root.hpp)
// of the patch's partials near a frequency, at the note's pitch or transposed with the decays
// kept (render --to-note: every frequency times the ratio, the offsets in Hz with them, the window
// the same), and the recording's own peak there (its heard spectrum).
//
// Two components under one main lobe (2 / T Hz half-width for T s) make one peak between them,
// pulled toward the stronger, and a transposition moves that peak by other than its ratio (an
// octave down halves the offset and can merge a pair the note's own pitch resolves). A partial
// added close to another (an early twin) must not take the copy's heard peak away from the
// recording's, at the note's pitch or an octave down (issue 17's to-note check reads the
// recording's peak times the ratio in the render).
//
// The copy's spectrum is computed on the complex baseband around ratio * freq_hz: for partials k
// (frequency f_k, phase phi_k, envelope A_k(t) in linear amplitude),
//   z(t) = w(t) sum_k A_k(t) exp(i (2 pi ratio (f_k - freq_hz) t + phi_k)),  t on a grid of step_s,
//   X(d) = sum_t z(t) exp(-i 2 pi d t),  w the Hann window over the span,
// |X| in dB on a grid of offsets d (grid_cents apart, within +-search_cents of ratio * freq_hz),
// its top refined by the vertex of the parabola through it and its neighbours (the QIFFT of a
// dB spectrum, as the recording's peak is read). The negative-frequency images are left out: at
// 20 Hz and more they stand 40 Hz and more from the peak, under the Hann side lobes' -31 dB.
// Glides are left out too (settled by the span's start on the notes measured). Checked by
// test_heard_shift against a direct DFT of the rendered partials.
#pragma once

#include <optional>
#include <span>

#include "analysis/heard_peaks.hpp"
#include "core/patch.hpp"

namespace wane {

struct heard_shift_params {
    double near_share = 0.04;    ///< partials within this share of freq_hz count (about 70 cents)
    double search_cents = 7.0;   ///< the peak is looked for within this of ratio * freq_hz
    double grid_cents = 0.25;    ///< the offsets' grid before the parabola
    double step_s = 0.0005;      ///< baseband grid: offsets up to 1 kHz (4% of 24 kHz)
};

/// The heard peak (Hz) near ratio * freq_hz of the partials of `partials` within near_share of
/// freq_hz, all frequencies times ratio, over the span [start_s, end_s) after the onset.
double copy_heard_peak_hz(std::span<const partial> partials, double freq_hz, double ratio, double start_s, double end_s,
                          const heard_shift_params& params = {});

/// The recording's heard peak (Hz) within search_cents of freq_hz, read off its heard spectrum
/// (the top bin and the parabola through it and its neighbours in dB); nullopt without a spectrum
/// or with the top at the search's edge.
std::optional<double> recording_heard_peak_hz(const heard_span_spectrum& heard, double freq_hz,
                                              const heard_shift_params& params = {});

}  // namespace wane

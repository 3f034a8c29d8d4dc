// Where a gliding partial is heard: the peak of its spectrum over the heard span (pitch/root.hpp,
// 0.1-1.1 s after the onset), relative to its settled frequency.
//
// A partial's freq_hz is where the recording's long spectrum (or its track's) puts it over the
// heard span, and the pitch a transposed copy is tuned by is read there
// (tests/cli/test_pitch_real_notes.sh). A glide that has not settled by the span's start moves
// the copy's peak off freq_hz: analysis/onset_glide then lowers (or raises) the settled frequency
// until the copy's peak is back where the partial is heard.
//
// The peak: the partial alone, a(t) cos(2 pi f t + phase + g(t)) (a its envelope's amplitude, g the
// glide's phase, core/glide.hpp), under a Hann window over [start_s, end_s]; its spectrum near f is
// A(nu) = sum_n a(t_n) w(t_n) e^(j g(t_n)) e^(-j 2 pi nu t_n) (sampled every step_s; the image at
// -f left out). Without a glide the windowed envelope is real, |A| is even in nu and the peak lies
// at nu = 0 (at f): the offset returned is the glide's alone.
#pragma once

#include "core/patch.hpp"

namespace wane {

struct glide_heard_params {
    double step_s = 0.001;        ///< the baseband's sample step (offsets up to 500 Hz alias-free)
    double grid_hz = 0.1;         ///< the coarse scan's step (the window's main lobe: +-2 Hz over 1 s)
    double tolerance_hz = 1e-5;   ///< the golden-section refinement's end
};

/// The offset (Hz) of q's spectral peak over [start_s, end_s] from q.freq_hz; 0 without a glide or
/// for a span under 10 steps. The peak is searched between 0 and the glide's largest frequency
/// offset over the span (at start_s), padded by two grid steps.
double glide_heard_offset_hz(const partial& q, double start_s, double end_s, const glide_heard_params& params);

}  // namespace wane

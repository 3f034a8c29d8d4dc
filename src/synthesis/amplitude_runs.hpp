// A noise band's amplitude across one synthesis frame, sample by sample (synthesis/noise_render):
// within an envelope piece it is an exponential, made as a chain of products a, a r, a r^2, ...
// (internal to src/synthesis).
#pragma once

#include <cstddef>
#include <span>
#include <vector>

#include "core/envelope.hpp"

namespace wane {

/// A run of a piece's exponential: dest[n] = a, then a *= ratio, for n < count (in double, one
/// chain of multiplies, each sample rounded to float as it is written).
struct amplitude_run {
    float* dest = nullptr;
    std::size_t count = 0;
    double a = 0.0;
    double ratio = 1.0;
};

/// Plays the runs, four at a time in step: each run's chain of multiplies waits on itself only,
/// so four run side by side, each the same sequence of products (the same floats) as alone.
void play_runs(std::span<const amplitude_run> runs);

/// dest[n] = the linear amplitude of envelope env (pieces: envelope_pieces(env), peak_lin: its
/// peak's amplitude) at t0_s + n * dt_s: 0 before the onset, the attack's ramp, and each piece's
/// exponential by one power per piece and a product per sample. The onset's and the attack's
/// samples are written here; each piece's run is appended to runs, for play_runs to write.
void fill_amplitude(const envelope& env, std::span<const envelope_piece> pieces, double peak_lin, double t0_s,
                    double dt_s, std::span<float> dest, std::vector<amplitude_run>& runs);

/// The first n in [from, size) whose time t0_s + n dt_s is not before end_s (size if none): the
/// per-sample test, which is monotone in n, found from its estimate and then checked as written.
std::size_t piece_stop(double t0_s, double dt_s, double end_s, std::size_t from, std::size_t size);

}  // namespace wane

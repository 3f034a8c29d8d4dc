// The per-lane powers a render plan's phasors start from (synthesis/render.cpp): a partial's turns
// e^(j w l) and a decay span's change e^(a l), l = 0 .. render_lanes, a row of libm calls each
// (sincos, exp: most of a plan's cost). The analysis plans the same partial again and again (trials
// of its attack, phase or level, a copy rendered over other spans), so the last rows a thread made
// are kept by the bits of their argument: a kept row is the row made anew, bit for bit.
#pragma once

#include <array>
#include <complex>
#include <cstddef>

#include "synthesis/render.hpp"

namespace wane {

/// (cos(w l), sin(w l)) as std::polar(1.0, w l) makes them, w = 2 pi cycles_per_frame, l <= render_lanes.
using lane_turns = std::array<std::complex<double>, render_lanes + 1>;
/// e^(ln_amp_per_frame l) (std::exp of the product; exactly 1 where ln_amp_per_frame is 0), l <= render_lanes.
using lane_decays = std::array<double, render_lanes + 1>;

lane_turns lane_turns_of(double cycles_per_frame);
lane_decays lane_decays_of(double ln_amp_per_frame);

}  // namespace wane

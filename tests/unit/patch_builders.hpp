// Patches built in code for the test programs: exact ground truth for edits, renders and keymaps.
#pragma once

#include <cmath>

#include "core/patch.hpp"
#include "core/units.hpp"

namespace wane::test {

/// A synthetic pitched patch: harmonics 1..n of f0_hz with B = 0, a two-segment decay each.
inline patch harmonic_patch(double f0_hz, int n, double b = 0.0) {
    patch p;
    p.note.name = "synthetic";
    p.note.f0_hz = f0_hz;
    p.note.length_s = 2.0;
    p.note.inharmonicity_b = b;
    for (int k = 1; k <= n; ++k) {
        partial q;
        q.harmonic = k;
        q.freq_hz = k * f0_hz * std::sqrt(1.0 + b * k * k);
        q.phase_rad = 0.1 * k;
        q.env.attack_s = 0.005;
        q.env.peak = level_db{-12.0 - 3.0 * k};
        q.env.decay = {{.t60_s = 1.5 / k, .until_s = 0.3}, {.t60_s = 4.0 / k, .until_s = {}}};
        p.partials.push_back(q);
    }
    return p;
}

}  // namespace wane::test

// The harmonic series of a stiff string.
#pragma once

#include <cmath>

namespace wane {

/// Frequency of partial n of a stiff string: f_n = n f0 sqrt(1 + B n^2) (Fletcher 1964); the
/// patch format's definition of inharmonicity_b. Hz in, Hz out.
inline double stiff_partial_hz(double f0_hz, double inharmonicity_b, int n) {
    const double nd = n;
    return nd * f0_hz * std::sqrt(1.0 + inharmonicity_b * nd * nd);
}

}  // namespace wane

// Fundamental frequency from spectral peaks (harmonic sieve with a two-way check), and the
// inharmonicity fit of stiff strings.
#pragma once

#include <span>

namespace wane {

struct pitch_peak {
    double freq_hz = 0.0;
    double level_db = 0.0;
};

struct pitch_params {
    double min_f0_hz = 25.0;
    double max_f0_hz = 4500.0;          ///< above C8 (4186 Hz)
    double strong_below_max_db = 40.0;  ///< peaks within this of the strongest take part
    int max_peaks = 24;                 ///< at most this many strongest peaks
    int max_divisor = 6;                ///< candidates f / k, k = 1..max_divisor, f a strong peak
    int max_harmonic = 40;
    int coverage_harmonics = 12;        ///< coverage counts harmonics 1..this (or the top match)
    double tolerance_rel = 0.012;       ///< |f / (n f0 s_n) - 1| allowed, plus the stiffness slack
    /// Largest B allowed for while sieving, s_n = sqrt(1 + B n^2) (grid 0 .. this).
    double max_inharmonicity = 3e-3;
    /// A sound is harmonic when the best candidate explains this fraction of the strong peaks'
    /// amplitude (sum of linear amplitudes).
    double min_explained = 0.8;
    /// ... and has peaks on this fraction of its harmonics up to the highest strong peak (at most
    /// coverage_harmonics): a low f0 bent by B can explain a few inharmonic partials, but then
    /// most of its series is empty (a free bar's 1 : 2.756 : 5.404 as harmonics 4, 11, 22).
    double min_coverage = 0.3;
};

struct pitch_estimate {
    double f0_hz = 0.0;      ///< 0 when not harmonic
    double inharmonicity_b = 0.0;
    double explained = 0.0;  ///< fraction of strong-peak amplitude on the series
    double coverage = 0.0;   ///< fraction of harmonics 1..n_top that have a peak
    bool harmonic = false;
};

/// Harmonic sieve over candidates f / k: score = explained x sqrt(coverage), where explained is the
/// amplitude fraction of strong peaks within tolerance of n f0 sqrt(1 + B n^2) (peaks -> series)
/// and coverage the fraction of the series up to the highest matched harmonic (at most
/// coverage_harmonics) that has a peak (series -> peaks), in the spirit of the two-way mismatch of Maher and Beauchamp 1994.
pitch_estimate estimate_pitch(std::span<const pitch_peak> peaks, const pitch_params& params = {});

/// Harmonic number of freq_hz on the series n f0 sqrt(1 + B n^2), 0 when farther than tolerance_rel
/// (relative) from the nearest member.
int harmonic_number(double freq_hz, double f0_hz, double inharmonicity_b, double tolerance_rel);

struct inharmonicity_fit {
    double f0_hz = 0.0;
    double inharmonicity_b = 0.0;
    int used = 0;
};

/// Weighted least squares of Fletcher's stiff-string law f_n = n f0 sqrt(1 + B n^2) (Fletcher 1964),
/// linear in (f_n / n)^2 = f0^2 + f0^2 B n^2. B below 0 (no stiffness resolvable) is returned as 0
/// with f0 refitted for B = 0. Needs >= 2 distinct harmonic numbers, else f0 from the mean ratio.
inharmonicity_fit fit_inharmonicity(std::span<const int> harmonic, std::span<const double> freq_hz,
                                    std::span<const double> weight);

/// f0 given B from the partials with 1 <= n <= max_harmonic: weighted least squares of
/// f_n = n f0 sqrt(1 + B n^2), f0 = sum w f_n n s_n / sum w (n s_n)^2. 0 when none qualifies.
double fit_f0_given_b(std::span<const int> harmonic, std::span<const double> freq_hz,
                      std::span<const double> weight, double inharmonicity_b, int max_harmonic);

/// The stiff-string series of a set of labelled partials: B from all of them (fit_inharmonicity,
/// equal weights: each partial's relative deviation counts alike), then f0 given that B from the
/// pitch-carrying low partials n <= low_harmonics (weights as given). Labels <= 0 are ignored;
/// where several partials carry one label only the one of largest weight counts.
inharmonicity_fit fit_harmonic_series(std::span<const int> harmonic, std::span<const double> freq_hz,
                                      std::span<const double> weight, int low_harmonics);

}  // namespace wane

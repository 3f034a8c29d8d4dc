// The harmonic series of a pitched note, fitted robustly: f0 and the stiff-string B from labelled
// partials, each weighted by how far its frequency can be trusted, with a few off-series partials
// (a mode of the body, a partial pulled by a neighbour) reweighted away.
#pragma once

#include <span>
#include <vector>

namespace wane {

/// One labelled partial for the series fit.
struct series_point {
    int harmonic = 0;      ///< n >= 1 (points with n < 1 or weight <= 0 are ignored)
    double freq_hz = 0.0;
    double weight = 0.0;   ///< reliability: relative inverse variance of the frequency in cents
};

struct series_fit_params {
    /// Tukey biweight tuning constant in units of the robust scale: 4.685 gives 95% efficiency
    /// on Gaussian residuals (Beaton and Tukey 1974; Holland and Welsch 1977).
    double tukey_c = 4.685;
    /// Floor on the robust scale (cents): real partials wander by fractions of a cent over a note,
    /// so a residual scale below this is not trusted to reject partials (common practice).
    double min_scale_cents = 0.25;
    int max_iterations = 30;
    /// Iterations stop when f0 moves less than this (cents) and B less than this relative step.
    double converged_cents = 1e-6;
};

struct series_fit {
    double f0_hz = 0.0;            ///< 0 when nothing could be fitted
    double inharmonicity_b = 0.0;  ///< >= 0
    double scale_cents = 0.0;      ///< robust scale of the residuals (1.4826 x weighted MAD)
    int used = 0;                  ///< points that entered the fit
    int rejected = 0;              ///< points the biweight gave weight 0 at the end
    bool b_fitted = false;         ///< false when B was fixed at 0 (one harmonic number, or B < 0)
};

/// Residual of partial n against the series, cents: 1200 log2(f / (n f0 sqrt(1 + B n^2))).
double series_residual_cents(double freq_hz, int harmonic, double f0_hz, double inharmonicity_b);

/// Robust weighted fit of Fletcher's law f_n = n f0 sqrt(1 + B n^2) (Fletcher 1964) in cents:
/// iteratively reweighted least squares (IRLS) of r_i = 1200 log2(f_i / (n_i f0 sqrt(1 + B n_i^2)))
/// over (ln f0, B) with Gauss-Newton steps, each point's weight = its reliability x the Tukey
/// biweight of r_i / (c s), s = max(1.4826 x weighted median |r|, min_scale_cents) (Holland and
/// Welsch 1977). Starts from the weighted linear least squares of (f/n)^2 = f0^2 + f0^2 B n^2.
/// B is held at 0 when only one harmonic number is present or the fit asks for B < 0.
series_fit fit_series(std::span<const series_point> points, const series_fit_params& params = {});

}  // namespace wane

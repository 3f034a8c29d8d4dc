#include "fitting/partial_freq.hpp"

#include <cmath>
#include <complex>
#include <vector>

#include "core/units.hpp"
#include "synthesis/kernel_clones.hpp"

namespace wane {

namespace {

/// Each phasor (re[k], im[k]) times its turn (turn_re[k], turn_im[k]), a complex product written
/// out (the numbers of std::complex's for finite values); compiled for AVX2 and the baseline
/// (WANE_KERNEL_CLONES: no FMA, the same products and sums bit for bit).
WANE_KERNEL_CLONES
void turn_phasors(double* re, double* im, const double* turn_re, const double* turn_im, std::size_t count) {
    for (std::size_t k = 0; k < count; ++k) {
        const double r = re[k] * turn_re[k] - im[k] * turn_im[k];
        im[k] = re[k] * turn_im[k] + im[k] * turn_re[k];
        re[k] = r;
    }
}

}  // namespace

double heard_freq_hz(std::span<const track_point> pts, std::size_t peak, std::size_t end) {
    constexpr double span_start_s = 0.1;
    constexpr double span_s = 1.0;
    constexpr std::size_t min_frames = 8;   ///< 0.1 s of frames at a 12.5 ms hop
    constexpr double clear_above_floor_db = 20.0;  ///< frames whose phase is trusted
    constexpr double search_hz = 3.0;   ///< well inside the frame rate's alias range (+-40 Hz at 12.5 ms)
    constexpr double step_hz = 0.05;    ///< about 1/20 of the main lobe of a 1 s Hann window
    constexpr double fine_refinement = 50.0;
    std::vector<double> w, t, phi;
    w.reserve(pts.size()), t.reserve(pts.size()), phi.reserve(pts.size());  // one allocation each
    double fa = 0.0, fw = 0.0;
    for (const track_point& p : pts) {
        const double u = (p.time_s - span_start_s) / span_s;
        if (u <= 0.0 || u >= 1.0 || p.level_db < p.floor_db + clear_above_floor_db) continue;
        const double a = (0.5 - 0.5 * std::cos(two_pi * u)) * to_amp(level_db{p.level_db}).lin;
        w.push_back(a);
        t.push_back(p.time_s);
        phi.push_back(p.phase_rad);
        fa += a * p.freq_hz;
        fw += a;
    }
    if (w.size() >= min_frames && fw > 0.0) {
        const double centre_hz = fa / fw;
        const auto power = [&](double f) {
            double re = 0.0, im = 0.0;
            for (std::size_t k = 0; k < w.size(); ++k) {
                const double arg = phi[k] - two_pi * f * t[k];
                re += w[k] * std::cos(arg);
                im += w[k] * std::sin(arg);
            }
            return re * re + im * im;
        };
        const int steps = static_cast<int>(std::lround(search_hz / step_hz));
        // The grid's powers with each frame's phasor w e^(i (phi - 2 pi f t)) turned by one step
        // per grid point (two sincos per frame, not one per frame and point; the turns' rounding,
        // ~1e-14 rad over the grid, is under that of the phase 2 pi f t itself).
        // The phasors on real and imaginary parts: the sum over the frames in frame order, then the
        // turn, a complex product written out (the numbers of std::complex's for finite values),
        // a loop the compiler vectorizes.
        const std::size_t frames = w.size();
        std::vector<double> ph_re(frames), ph_im(frames), turn_re(frames), turn_im(frames);
        const double lowest_hz = centre_hz - steps * step_hz;
        for (std::size_t k = 0; k < frames; ++k) {
            const std::complex<double> phasor = std::polar(w[k], phi[k] - two_pi * lowest_hz * t[k]);
            const std::complex<double> turn = std::polar(1.0, -two_pi * step_hz * t[k]);
            ph_re[k] = phasor.real(), ph_im[k] = phasor.imag();
            turn_re[k] = turn.real(), turn_im[k] = turn.imag();
        }
        int best = -steps;
        double best_p = -1.0;
        for (int j = -steps; j <= steps; ++j) {
            double sum_re = 0.0, sum_im = 0.0;
            for (std::size_t k = 0; k < frames; ++k) sum_re += ph_re[k], sum_im += ph_im[k];
            turn_phasors(ph_re.data(), ph_im.data(), turn_re.data(), turn_im.data(), frames);
            if (const double pw = std::norm(std::complex<double>{sum_re, sum_im}); pw > best_p) best_p = pw, best = j;
        }
        if (best > -steps && best < steps) {
            // Parabolas through the log power at the peak and its neighbours: on the grid, then
            // again at a step 50 times finer around the first vertex (removes its bias).
            double f = centre_hz + best * step_hz;
            for (const double h : {step_hz, step_hz / fine_refinement}) {
                const double a = std::log(power(f - h));
                const double b = std::log(power(f));
                const double c = std::log(power(f + h));
                const double den = a - 2.0 * b + c;
                if (den < 0.0) f += 0.5 * (a - c) / den * h;
            }
            return f;
        }
    }
    fa = 0.0, fw = 0.0;
    for (std::size_t i = peak; i < end; ++i) {
        const double a = to_amp(level_db{pts[i].level_db}).lin;
        fa += a * pts[i].freq_hz;
        fw += a;
    }
    return fa / fw;
}

}  // namespace wane

#include "measure/octave_filter.hpp"

#include <array>
#include <cassert>
#include <cmath>
#include <complex>

#include "core/units.hpp"

namespace wane {

octave_filter::octave_filter(const octave_band& band, double sample_rate_hz, int prototype_order)
    : band_(band), sample_rate_hz_(sample_rate_hz) {
    assert(prototype_order >= 1);
    assert(band.upper_edge_hz < 0.5 * sample_rate_hz);
    using cplx = std::complex<double>;
    // Bilinear transform s = K (1 - z^-1) / (1 + z^-1), K = 2 fs; the analog edges are prewarped
    // W = K tan(pi f / fs) so the digital -3.01 dB points land exactly on f_1 and f_2.
    const double k = 2.0 * sample_rate_hz;
    const double w1 = k * std::tan(pi * band.lower_edge_hz / sample_rate_hz);
    const double w2 = k * std::tan(pi * band.upper_edge_hz / sample_rate_hz);
    const double w0_sq = w1 * w2;     // W0^2, geometric centre of the analog band
    const double bw = w2 - w1;        // B, analog bandwidth in rad/s
    const int n = prototype_order;

    // Analog bandpass section from one bandpass pole q (and its conjugate):
    //   H(s) = B s / (s^2 - 2 Re(q) s + |q|^2); the product of the N sections has gain 1 at W0.
    auto add_section = [&](cplx q) {
        const double c1 = -2.0 * q.real();
        const double c0 = std::norm(q);
        const double d0 = k * k + c1 * k + c0;
        sections_.push_back(biquad_coeffs{.b0 = bw * k / d0,
                                          .b1 = 0.0,
                                          .b2 = -bw * k / d0,
                                          .a1 = (2.0 * c0 - 2.0 * k * k) / d0,
                                          .a2 = (k * k - c1 * k + c0) / d0});
    };
    // Butterworth lowpass poles p_m = exp(j pi (2m + N - 1) / (2N)), m = 1..N (unit cutoff).
    // Each maps to the two roots of s^2 - p B s + W0^2 = 0. Poles in the upper half plane give
    // two sections (their conjugates give the conjugate roots); a real pole gives one conjugate pair.
    constexpr double imag_eps = 1e-12;
    for (int m = 1; m <= n; ++m) {
        const cplx p = std::polar(1.0, pi * (2.0 * m + n - 1.0) / (2.0 * n));
        if (p.imag() < -imag_eps) continue;
        const cplx disc = std::sqrt(p * p * bw * bw - 4.0 * w0_sq);
        const cplx q1 = 0.5 * (p * bw + disc);
        const cplx q2 = 0.5 * (p * bw - disc);
        add_section(q1);
        if (p.imag() > imag_eps) add_section(q2);
    }
    assert(static_cast<int>(sections_.size()) == n);
}

std::vector<float> octave_filter::apply(std::span<const float> x) const {
    std::vector<double> buf(x.begin(), x.end());
    for (const biquad_coeffs& c : sections_) {
        // Transposed direct form II, state in double.
        double s1 = 0.0, s2 = 0.0;
        const double b0 = c.b0, b1 = c.b1, b2 = c.b2, a1 = c.a1, a2 = c.a2;
        for (double& v : buf) {
            const double in = v;
            const double out = b0 * in + s1;
            s1 = b1 * in - a1 * out + s2;
            s2 = b2 * in - a2 * out;
            v = out;
        }
    }
    std::vector<float> y(buf.size());
    for (std::size_t i = 0; i < buf.size(); ++i) y[i] = static_cast<float>(buf[i]);
    return y;
}

double octave_filter::gain_db(double freq_hz) const {
    using cplx = std::complex<double>;
    const cplx zinv = std::polar(1.0, -two_pi * freq_hz / sample_rate_hz_);
    const cplx zinv2 = zinv * zinv;
    cplx h{1.0, 0.0};
    for (const biquad_coeffs& c : sections_) {
        h *= (c.b0 + c.b1 * zinv + c.b2 * zinv2) / (1.0 + c.a1 * zinv + c.a2 * zinv2);
    }
    return 20.0 * std::log10(std::abs(h));
}

}  // namespace wane

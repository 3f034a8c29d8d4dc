// Band-limited rate conversion for the noise renderer (synthesis/noise_render.hpp draws its noise
// at 48 kHz times a power of two and converts it to the output rate).
//
// Output sample n is the input read at p = n from_rate / to_rate (input samples):
//   y[n] = sum_j x[j] h(p - j),  h(d) = c sinc(c d) w(d),  c = to_rate / from_rate,
// sinc(x) = sin(pi x) / (pi x), so h passes up to the output's Nyquist frequency; w is a Kaiser
// window over |d| <= L/2 (Kaiser 1974; design formulas in Oppenheim and Schafer, Discrete-Time
// Signal Processing, section 7.6: beta = 0.1102 (A - 8.7) for a stopband A > 50 dB, length
// L = (A - 8) / (2.285 dw) + 1 for a transition of dw rad/sample). Transition: 0.9 to 1.1 times
// the output's Nyquist frequency, so whatever aliases lands above 0.9 of it (at 44.1 kHz, above
// 19.8 kHz) and the passband is flat to 19.8 kHz. A = 60 dB. The kernel is tabulated at
// kernel_phases fractional positions (nearest one used: a time error of at most 1/(2 * 1024)
// input samples, -58 dB at 20 kHz from 48 kHz), each phase's taps scaled to sum to 1 (exact DC).
#pragma once

#include <cstddef>
#include <span>

namespace wane {

/// Adds x (sampled at from_rate_hz, x[0] at t = 0) converted to to_rate_hz <= from_rate_hz into
/// out (out[n] at t = n / to_rate_hz); x is zero outside its span.
void add_rate_converted(std::span<const float> x, double from_rate_hz, double to_rate_hz, std::span<float> out);

/// Output samples [out_first, out_first + out.size()) of add_rate_converted(x_whole, ...) with x_whole
/// x_total samples long, added bit for bit as that adds them, given x = x_whole's samples
/// [x_first, x_first + x.size()) covering rate_convert_reads(...) of that stretch.
void add_rate_converted_part(std::span<const float> x, std::size_t x_first, std::size_t x_total, double from_rate_hz,
                             double to_rate_hz, std::size_t out_first, std::span<float> out);

/// The input samples [first, end) (within [0, x_total)) that output samples [out_first,
/// out_first + out_count) read.
struct rate_convert_reach {
    std::size_t first = 0;
    std::size_t end = 0;
};
rate_convert_reach rate_convert_reads(double from_rate_hz, double to_rate_hz, std::size_t out_first, std::size_t out_count,
                                      std::size_t x_total);

/// The kernel's length in input samples at a ratio (the formula above, rounded up to a multiple of 8).
int rate_convert_taps(double from_rate_hz, double to_rate_hz);

/// The most the conversion can scale a signal's largest magnitude: the largest sum of the taps'
/// magnitudes over the kernel's phases (|y[n]| <= this times max |x| over the taps n reads).
double rate_convert_gain(double from_rate_hz, double to_rate_hz);

}  // namespace wane

#include "modes/mode_residual.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <complex>
#include <memory>

#include <Eigen/Core>

#include "core/units.hpp"
#include "modes/tile_products.hpp"

namespace wane {

namespace {

constexpr std::size_t anchor_n = 2048; ///< the phasor is re-anchored from the exact power this often
constexpr int lanes_n = 4;             ///< samples side by side

/// out[n] += Re(amp a[n] exp(i omega n)) for n in [0, out.size()): a[n] = exp(rho n) when shape is
/// empty, else shape[n]. Four consecutive samples side by side (lane j: sample n + j), each lane's
/// phasor turned by exp(4 i omega) per step, real and imaginary parts written out, so the loop is
/// plain multiply-add; the phasors are re-anchored from the exact power every anchor_n samples.
void add_phasor(std::span<double> out, double omega, double rho, std::span<const double> shape,
                std::complex<double> amp) {
    using lanes = Eigen::Array<double, lanes_n, 1>;
    using out_lanes = Eigen::Map<lanes, Eigen::Unaligned>;
    using in_lanes = Eigen::Map<const lanes, Eigen::Unaligned>;
    const bool plain = shape.empty();
    const std::complex<double> turn = std::polar(1.0, lanes_n * omega);
    const double ratio = plain ? std::exp(lanes_n * rho) : 1.0;
    // Lane j's offsets from the anchor: exp(i omega j) and exp(rho j).
    std::array<std::complex<double>, lanes_n> lane_turn{};
    lanes lane_decay = lanes::Ones();
    for (int j = 0; j < lanes_n; ++j) {
        lane_turn[static_cast<std::size_t>(j)] = std::polar(1.0, omega * j);
        if (plain) lane_decay(j) = std::exp(rho * j);
    }
    const std::size_t count = out.size();
    lanes pr, pim, s = lanes::Ones();
    for (std::size_t start = 0; start < count; start += anchor_n) {
        const auto at = static_cast<double>(start);
        const std::complex<double> p0 = amp * std::polar(1.0, std::remainder(omega * at, two_pi));
        for (int j = 0; j < lanes_n; ++j) {
            const std::complex<double> p = p0 * lane_turn[static_cast<std::size_t>(j)];
            pr(j) = p.real(), pim(j) = p.imag();
        }
        if (plain) s = std::exp(rho * at) * lane_decay;
        const std::size_t end = std::min(count, start + anchor_n);
        // One step: the lanes' samples added, the phasors turned (and the decay stepped).
        const auto step = [&](std::size_t n, const lanes& a) {
            out_lanes(&out[n]) += a * pr;
            const lanes next_r = pr * turn.real() - pim * turn.imag();
            pim = pr * turn.imag() + pim * turn.real();
            pr = next_r;
        };
        std::size_t n = start;
        if (plain) {
            for (; n + lanes_n <= end; n += lanes_n) step(n, s), s *= ratio;
        } else {
            for (; n + lanes_n <= end; n += lanes_n) step(n, in_lanes(&shape[n]));
        }
        for (int j = 0; n < end; ++n, ++j) out[n] += (plain ? s(j) : shape[n]) * pr(j);  // the last few
    }
}

/// Samples per block of subtract_plain_modes.
constexpr std::size_t block_n = 64;

/// out[n] -= Re(amp_k z_k^n) for the plain modes k (z_k = exp(rho_k + i omega_k)), n = b B + m
/// (B = block_n): Re(amp_k z_k^(bB) z_k^m) summed over k is the real part of the matrix product
/// C = A Z, A(b, k) = amp_k z_k^(bB) (blocks x modes), Z(k, m) = z_k^m (modes x B), so
/// Re C = Re A Re Z - Im A Im Z: one product of depth 2K (Re A beside -Im A, Re Z over Im Z) by
/// modes/tile_products.hpp, O(blocks K B), at the speed of a matrix product instead of one
/// phasor chain per mode. z^m by products over m < B; z^(bB) by products of z^B, re-anchored
/// from the exact power every 16 blocks.
void subtract_plain_modes(std::span<double> out, std::span<const double> rho, std::span<const double> omega,
                          std::span<const std::complex<double>> amp) {
    const std::size_t k_count = rho.size();
    const std::size_t count = out.size();
    if (k_count == 0 || count == 0) return;
    const std::size_t blocks = (count + block_n - 1) / block_n;
    const std::size_t rows_pad = (blocks + product_tile_rows - 1) / product_tile_rows * product_tile_rows;
    const std::size_t cols_pad = (block_n + product_tile_cols - 1) / product_tile_cols * product_tile_cols;
    // a(b, d) at a[d * rows_pad + b], d < 2K: Re A then -Im A; z(m, d) at z[d * cols_pad + m]: Re Z then Im Z.
    // Not zeroed whole: the loops below write every entry but the padding (rows b >= blocks of a,
    // m >= block_n of z), which is zeroed here.
    const auto a = std::make_unique_for_overwrite<double[]>(rows_pad * 2 * k_count);
    const auto z = std::make_unique_for_overwrite<double[]>(cols_pad * 2 * k_count);
    for (std::size_t d = 0; d < 2 * k_count; ++d) {
        std::fill(a.get() + d * rows_pad + blocks, a.get() + (d + 1) * rows_pad, 0.0);
        std::fill(z.get() + d * cols_pad + block_n, z.get() + (d + 1) * cols_pad, 0.0);
    }
    for (std::size_t k = 0; k < k_count; ++k) {
        const std::complex<double> step_z = std::exp(std::complex<double>{rho[k], omega[k]});
        std::complex<double> p{1.0, 0.0};
        for (std::size_t m = 0; m < block_n; ++m) {
            z[k * cols_pad + m] = p.real(), z[(k_count + k) * cols_pad + m] = p.imag();
            p *= step_z;
        }
        const auto step_n = static_cast<double>(block_n);
        const std::complex<double> step = std::exp(std::complex<double>{rho[k] * step_n, std::remainder(omega[k] * step_n, two_pi)});
        std::complex<double> at{};
        for (std::size_t b = 0; b < blocks; ++b) {
            if (b % 16 == 0) {
                const double n = static_cast<double>(b) * step_n;
                at = amp[k] * std::exp(std::complex<double>{rho[k] * n, std::remainder(omega[k] * n, two_pi)});
            }
            a[k * rows_pad + b] = at.real(), a[(k_count + k) * rows_pad + b] = -at.imag();
            at *= step;
        }
    }
    // minus_c = 0 - (Re A Re Z - Im A Im Z) = -Re C, blocks x B (column-major).
    std::vector<double> minus_c(blocks * block_n, 0.0);
    subtract_products(minus_c.data(), blocks,
                      {.a = a.get(), .a_rows = rows_pad, .b = z.get(), .b_rows = cols_pad, .depth = 2 * k_count}, blocks,
                      block_n, false);
    for (std::size_t b = 0; b < blocks; ++b) {
        const std::size_t first = b * block_n;
        const std::size_t end = std::min(count, first + block_n);
        for (std::size_t n = first; n < end; ++n) out[n] += minus_c[(n - first) * blocks + b];
    }
}

}  // namespace

void subtract_fitted_modes(std::span<double> out, double sample_rate_hz, std::span<const damped_mode> modes,
                           std::span<const mode_shape> shapes) {
    assert(sample_rate_hz > 0.0 && shapes.size() == modes.size());
    std::vector<double> rho, omega, scratch;
    std::vector<std::complex<double>> amp;
    for (std::size_t k = 0; k < modes.size(); ++k) {
        if (!shapes[k].empty()) {
            add_mode_samples(out, sample_rate_hz, modes[k], shapes[k], -1.0, scratch);
            continue;
        }
        rho.push_back(-modes[k].decay_per_s / sample_rate_hz);
        omega.push_back(two_pi * modes[k].freq_hz / sample_rate_hz);
        amp.push_back(modes[k].amp);
    }
    subtract_plain_modes(out, rho, omega, amp);
}

void add_mode_samples(std::span<double> out, double sample_rate_hz, const damped_mode& m, const mode_shape& shape,
                      double gain, std::vector<double>& scratch) {
    assert(sample_rate_hz > 0.0);
    const double omega = two_pi * m.freq_hz / sample_rate_hz;  // rad per sample
    if (shape.empty()) {
        // The plain mode: gain Re(amp z^n), z = exp(-d / fs + i omega).
        add_phasor(out, omega, -m.decay_per_s / sample_rate_hz, {}, gain * m.amp);
        return;
    }
    shape_samples(shape, out.size(), scratch);
    add_phasor(out, omega, 0.0, scratch, gain * m.amp);
}

std::vector<float> fit_residual(std::span<const float> x, double sample_rate_hz, std::span<const damped_mode> modes,
                                 std::span<const mode_shape> shapes) {
    assert(shapes.size() == modes.size());
    std::vector<double> out(x.begin(), x.end());
    subtract_fitted_modes(out, sample_rate_hz, modes, shapes);
    return {out.begin(), out.end()};
}

band_energies band_energy_left(const note_spectrum& residual_spectrum, std::size_t count, double sample_rate_hz,
                               const damped_mode& m, double low_hz, double high_hz) {
    long first_bin = 0;
    const std::vector<std::complex<double>> bins = residual_spectrum.bins_between(low_hz, high_hz, first_bin);
    const auto size = static_cast<double>(residual_spectrum.fft_size());
    const auto n = static_cast<double>(count);
    const double omega = two_pi * m.freq_hz / sample_rate_hz;  // rad per sample
    const double rho = -m.decay_per_s / sample_rate_hz;
    // Bin k of Re(amp z^n), n < count: (amp / 2) sum (z w)^n + (conj(amp) / 2) sum (conj(z) w)^n,
    // w = exp(-i 2 pi k / M) (the forward DFT's kernel), each sum (q^count - 1) / (q - 1). From
    // one bin to the next, q turns by exp(-i 2 pi / M) and q^count by exp(-i 2 pi count / M).
    const double bin_rad = two_pi * static_cast<double>(first_bin) / size;
    std::complex<double> q_up = std::exp(std::complex<double>{rho, omega - bin_rad});
    std::complex<double> q_down = std::exp(std::complex<double>{rho, -omega - bin_rad});
    std::complex<double> qn_up = std::exp(n * std::complex<double>{rho, omega - bin_rad});
    std::complex<double> qn_down = std::exp(n * std::complex<double>{rho, -omega - bin_rad});
    const std::complex<double> step = std::polar(1.0, -two_pi / size);
    const std::complex<double> step_n = std::polar(1.0, std::remainder(-two_pi * n / size, two_pi));
    double sum = 0.0, own = 0.0;
    for (const std::complex<double>& bin : bins) {
        const std::complex<double> mode_bin =
            0.5 * m.amp * (qn_up - 1.0) / (q_up - 1.0) + 0.5 * std::conj(m.amp) * (qn_down - 1.0) / (q_down - 1.0);
        sum += std::norm(bin + mode_bin);
        own += std::norm(mode_bin);
        q_up *= step, q_down *= step, qn_up *= step_n, qn_down *= step_n;
    }
    return {.left = 2.0 * sum / size, .mode = 2.0 * own / size};  // as note_spectrum::energy_between
}

}  // namespace wane

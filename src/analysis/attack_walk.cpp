// The residual's updates of the attack search (analysis/onset_attack.cpp; see attack_walk.hpp).
#include "analysis/attack_walk.hpp"

#include <array>
#include <cmath>
#include <complex>
#include <optional>
#include <span>
#include <type_traits>
#include <vector>

#include "core/units.hpp"
#include "synthesis/kernel_clones.hpp"

namespace wane {

namespace {

/// rho of a shape that is one plain exponential exp(rho n) over [0, count) (empty: the mode's own
/// decay), which add_group makes itself; nothing for any other shape.
std::optional<double> plain_rho(const damped_mode& m, const mode_shape& shape, double sample_rate_hz, std::size_t count) {
    if (shape.empty()) return -m.decay_per_s / sample_rate_hz;
    const shape_piece& p = shape.front();
    if (shape.size() == 1 && p.start == 0 && p.count == count && p.scale == 1.0 && p.power == 0) return p.rho;
    return std::nullopt;
}

/// Doubles side by side (GCC/Clang vector extension) for L blocks (L <= 4): two lanes at least (one
/// double is no vector); a lane past L stays 0 and is never stored.
using two_lanes = double __attribute__((vector_size(16)));
using four_lanes = double __attribute__((vector_size(32)));
template <int L>
using block_lanes = std::conditional_t<(L > 2), four_lanes, two_lanes>;

/// One mode's part as add_blocks walks it: sign * Re(amp a[n] exp(i omega n)), a its shape's
/// samples, or exp(rho n) where samples is empty.
struct mode_walk {
    std::span<const double> samples;
    double rho = 0.0;
    double omega = 0.0;
    std::complex<double> amp;
    double sign = 1.0;
};

/// add_group<1>'s work on L of its 512-sample blocks at once, blocks first_block .. first_block +
/// L - 1 (each `length` samples), for C modes in turn: every block's chains start from their exact
/// anchors there, so the blocks are independent and each sample gets the arithmetic it gets in
/// add_group<1>; the L chains overlap (one alone waits on its own products), side by side in a
/// vector of doubles (GCC/Clang vector extension). Each sum out[n] takes the modes' terms in their
/// order, one addition each (as C passes of one mode would). With Demodulate, each sum out[n] is
/// also taken times the last mode's phasor into demod[n] (v p[n] for the sum v: the products of
/// std::complex's multiplication, written out, on the chain the sum walks).
template <int L, bool Demodulate, std::size_t C>
[[gnu::always_inline]] inline void add_blocks(const std::array<mode_walk, C>& modes, std::size_t first_block, std::size_t length,
                                              std::vector<double>& out, std::vector<std::complex<double>>* demod) {
    constexpr std::size_t block = 512;
    using lanes = block_lanes<L>;
    std::array<lanes, C> pr{}, pi_{}, s{};
    std::array<std::complex<double>, C> z{};
    std::array<double, C> ratio{};
    std::array<bool, C> plain{};
    std::array<std::size_t, L> at{};
    for (int l = 0; l < L; ++l) at[static_cast<std::size_t>(l)] = (first_block + static_cast<std::size_t>(l)) * block;
    for (std::size_t c = 0; c < C; ++c) {
        const mode_walk& m = modes[c];
        plain[c] = m.samples.empty();
        z[c] = std::polar(1.0, m.omega);
        ratio[c] = plain[c] ? std::exp(m.rho) : 1.0;
        for (int l = 0; l < L; ++l) {
            const auto start = static_cast<double>(at[static_cast<std::size_t>(l)]);
            const std::complex<double> p = std::polar(1.0, std::remainder(m.omega * start, two_pi));
            pr[c][l] = p.real(), pi_[c][l] = p.imag();
            if (plain[c]) s[c][l] = 1.0 * std::exp(m.rho * start);
        }
    }
    double* const sums = out.data();
    std::complex<double>* const demod_at = Demodulate ? demod->data() : nullptr;
    for (std::size_t t = 0; t < length; ++t) {
        // out[n] += term of each mode, the L sums side by side (each the one addition out[n] + term).
        lanes v{};
        for (int l = 0; l < L; ++l) v[l] = sums[at[static_cast<std::size_t>(l)] + t];
        for (std::size_t c = 0; c < C; ++c) {
            const mode_walk& m = modes[c];
            if (!plain[c])
                for (int l = 0; l < L; ++l) s[c][l] = m.samples[at[static_cast<std::size_t>(l)] + t];
            const lanes term = m.sign * s[c] * (m.amp.real() * pr[c] - m.amp.imag() * pi_[c]);
            if (plain[c]) s[c] *= ratio[c];
            v += term;
        }
        for (int l = 0; l < L; ++l) sums[at[static_cast<std::size_t>(l)] + t] = v[l];
        if constexpr (Demodulate) {
            const lanes re = v * pr[C - 1], im = v * pi_[C - 1];
            for (int l = 0; l < L; ++l) demod_at[at[static_cast<std::size_t>(l)] + t] = {re[l], im[l]};
        }
        for (std::size_t c = 0; c < C; ++c) {
            const lanes next_r = pr[c] * z[c].real() - pi_[c] * z[c].imag();
            pi_[c] = pr[c] * z[c].imag() + pi_[c] * z[c].real();
            pr[c] = next_r;
        }
    }
}

/// add_mode_part's blocks, four at a time, then two, then one (add_blocks).
template <bool Demodulate, std::size_t C>
[[gnu::always_inline]] inline void add_all_blocks(const std::array<mode_walk, C>& modes, std::vector<double>& out,
                                                  std::vector<std::complex<double>>* demod) {
    constexpr std::size_t block = 512;
    const std::size_t count = out.size();
    const std::size_t full = count / block;
    std::size_t b = 0;
    for (; b + 4 <= full; b += 4) add_blocks<4, Demodulate>(modes, b, block, out, demod);
    for (; b + 2 <= full; b += 2) add_blocks<2, Demodulate>(modes, b, block, out, demod);
    for (; b < full; ++b) add_blocks<1, Demodulate>(modes, b, block, out, demod);
    if (full * block < count) add_blocks<1, Demodulate>(modes, full, count - full * block, out, demod);
}

/// mode m with shape `shape` (exp(-d n / fs) when empty) as add_blocks walks it, its samples (when
/// not a plain exponential) made in scratch.
mode_walk walk_of(const damped_mode& m, const mode_shape& shape, double sample_rate_hz, double sign, std::size_t count,
                  std::vector<double>& scratch) {
    const std::optional<double> rho = plain_rho(m, shape, sample_rate_hz, count);
    if (!rho) shape_samples(shape, count, scratch);
    return {.samples = rho ? std::span<const double>{} : std::span<const double>(scratch), .rho = rho.value_or(0.0),
            .omega = two_pi * m.freq_hz / sample_rate_hz, .amp = m.amp, .sign = sign};
}

}  // namespace

/// Adds sign * Re(amp a[n] exp(i omega n)) for n in [0, out.size()) to out; a is the mode's shape
/// (exp(-d n / fs) when empty). The phasor is re-anchored from the exact power every 512 samples:
/// add_group<1>'s sums, its blocks four at a time (add_all_blocks). With demod, out[n] exp(i omega n)
/// (the sum times the same phasor) into (*demod)[n] as well. Compiled for AVX2 (four blocks in one
/// register) and the baseline (no FMA: the same bits).
WANE_KERNEL_CLONES
void add_mode_part(const damped_mode& m, const mode_shape& shape, double sample_rate_hz, double sign,
                   std::vector<double>& out, std::vector<double>& scratch, std::vector<std::complex<double>>* demod) {
    const std::array<mode_walk, 1> one{walk_of(m, shape, sample_rate_hz, sign, out.size(), scratch)};
    if (demod != nullptr) add_all_blocks<true>(one, out, demod);
    else add_all_blocks<false>(one, out, nullptr);
}

/// add_mode_part of `gone` (shape gone_shape, sign -1), then of `next` (next_shape, sign +1, demodulated
/// into demod), in one pass over out: each sample's two additions in that order, the same sums.
WANE_KERNEL_CLONES
void swap_mode_parts(const damped_mode& gone, const mode_shape& gone_shape, const damped_mode& next, const mode_shape& next_shape,
                double sample_rate_hz, std::vector<double>& out, std::array<std::vector<double>, 2>& scratch,
                std::vector<std::complex<double>>& demod) {
    const std::array<mode_walk, 2> two{walk_of(gone, gone_shape, sample_rate_hz, -1.0, out.size(), scratch[0]),
                                       walk_of(next, next_shape, sample_rate_hz, 1.0, out.size(), scratch[1])};
    add_all_blocks<true>(two, out, &demod);
}

}  // namespace wane

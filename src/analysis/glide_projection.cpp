// The block sums behind the onset glide search and S(c0, tau) from them (see glide_projection.hpp).
#include "analysis/glide_projection.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <cstdint>
#include <cstring>
#include <numbers>
#include <numeric>

#include "core/envelope.hpp"
#include "core/glide.hpp"
#include "core/sincos_poly.hpp"
#include "core/units.hpp"
#include "synthesis/kernel_clones.hpp"

namespace wane::glide_projection {

namespace {

using cplx = std::complex<double>;

/// |z| as the bounds take it: sqrt(re^2 + im^2), within two ulps of std::abs (hypot) and a
/// fraction of its cost; std::abs itself where the squares could underflow (or overflow). The
/// bounds built on it are padded by far more (bound_margin, explains_under's 1e-6).
double bound_abs(std::complex<double> z) {
    const double squared = std::norm(z);
    return squared > 1e-250 && squared < 1e250 ? std::sqrt(squared) : std::abs(z);
}

/// s's tail sums (block_sums::tail_z, tail_z1).
void add_tails(block_sums& s) {
    const std::size_t count = s.z.size();
    s.tail_z.assign(count + 1, 0.0);
    s.tail_z1.assign(count + 1, 0.0);
    s.tail_sum.assign(count + 1, cplx{});
    s.abs_z.resize(count);
    s.abs_z1.resize(count);
    for (std::size_t b = count; b-- > 0;) {
        s.abs_z[b] = bound_abs(s.z[b]);
        s.abs_z1[b] = bound_abs(s.z1[b]);
        s.tail_z[b] = s.tail_z[b + 1] + s.abs_z[b];
        s.tail_z1[b] = s.tail_z1[b + 1] + s.abs_z1[b];
        s.tail_sum[b] = s.tail_sum[b + 1] + s.z[b];
    }
}

/// Samples between two phasors made from their phase (heterodyne's stretches): a multiple of 4.
constexpr std::size_t walk_stretch = 32;

/// y[n] e^(-j 2 pi f n / fs) for n < count, its real and imaginary parts. Four consecutive
/// samples' phasors side by side (a vector of four doubles), made from the fraction of n f / fs
/// cycles (sincos_poly) at the start of every walk_stretch samples and rotated on by four samples'
/// turn e^(-j 8 pi f / fs) between them (a few ulps off at most over a stretch; a sincos_poly per
/// sample cost twice the rest); the last samples one at a time. Compiled for AVX2 and for the
/// baseline (synthesis/kernel_clones.hpp: no FMA, the same bits).
WANE_KERNEL_CLONES
void heterodyne(const double* __restrict y, std::size_t count, double cycles_per_frame, double* __restrict re,
                double* __restrict im) {
    using lanes = double __attribute__((vector_size(32)));
    assert(count < (std::size_t{1} << 31U) && cycles_per_frame >= 0.0 && cycles_per_frame <= 0.5);
    // The phasor at n from its phase, -2 pi times the fraction of n f / fs cycles (cycles >= 0).
    const auto phase_at = [cycles_per_frame](std::size_t n) {
        double cycles = static_cast<double>(n) * cycles_per_frame;
        cycles -= static_cast<double>(static_cast<std::int64_t>(cycles));
        return -two_pi * cycles;
    };
    const auto phasor_at = [&](std::size_t n, double& sin_p, double& cos_p) { sincos_poly(phase_at(n), sin_p, cos_p); };
    double turn_sin = 0.0, turn_cos = 1.0;
    phasor_at(4, turn_sin, turn_cos);
    std::size_t from = 0;
    for (; from + walk_stretch <= count; from += walk_stretch) {
        alignas(32) double phase[4], sin_a[4], cos_a[4];
        for (std::size_t l = 0; l < 4; ++l) phase[l] = phase_at(from + l);
        for (std::size_t l = 0; l < 4; ++l) sincos_poly(phase[l], sin_a[l], cos_a[l]);
        lanes c, s;
        std::memcpy(&c, cos_a, sizeof c), std::memcpy(&s, sin_a, sizeof s);
        for (std::size_t n = from;; n += 4) {
            lanes y4;
            std::memcpy(&y4, y + n, sizeof y4);
            const lanes zr = y4 * c, zi = y4 * s;
            std::memcpy(re + n, &zr, sizeof zr), std::memcpy(im + n, &zi, sizeof zi);
            if (n + 4 == from + walk_stretch) break;
            const lanes next_c = c * turn_cos - s * turn_sin;
            s = s * turn_cos + c * turn_sin;
            c = next_c;
        }
    }
    for (std::size_t n = from; n < count; ++n) {
        double s = 0.0, c = 1.0;
        phasor_at(n, s, c);
        re[n] = y[n] * c;
        im[n] = y[n] * s;
    }
}

/// One block's flat sums, Z = sum z[j] and Z1 = sum (j - (block - 1) / 2) z[j] over j < block, in
/// j order (re, im: the block's first sample; the offset from the centre is exact, a half-integer).
void flat_sums_of_one(const double* re, const double* im, std::size_t block, cplx& z, cplx& z1) {
    const double half = 0.5 * static_cast<double>(block - 1);
    double zr = 0.0, zi = 0.0, z1r = 0.0, z1i = 0.0;
    for (std::size_t j = 0; j < block; ++j) {
        const double offset = static_cast<double>(j) - half;
        zr += re[j], zi += im[j];
        z1r += offset * re[j], z1i += offset * im[j];
    }
    z = {zr, zi}, z1 = {z1r, z1i};
}

/// Four doubles side by side (GCC/Clang vector extensions: one AVX register, two SSE registers).
using lanes = double __attribute__((vector_size(32)));

/// The 4 x 4 block of doubles a[k][l] as b[l][k] (the rows four loads, the columns four lanes).
[[gnu::always_inline]] inline void transpose_four(lanes& a0, lanes& a1, lanes& a2, lanes& a3) {
    const lanes lo01 = __builtin_shufflevector(a0, a1, 0, 4, 2, 6), hi01 = __builtin_shufflevector(a0, a1, 1, 5, 3, 7);
    const lanes lo23 = __builtin_shufflevector(a2, a3, 0, 4, 2, 6), hi23 = __builtin_shufflevector(a2, a3, 1, 5, 3, 7);
    a0 = __builtin_shufflevector(lo01, lo23, 0, 1, 4, 5);
    a1 = __builtin_shufflevector(hi01, hi23, 0, 1, 4, 5);
    a2 = __builtin_shufflevector(lo01, lo23, 2, 3, 6, 7);
    a3 = __builtin_shufflevector(hi01, hi23, 2, 3, 6, 7);
}

/// Four consecutive blocks' flat sums (flat_sums_of_one's, the same operations in the same order
/// per block: the same numbers), the blocks in four lanes: four independent chains of additions in
/// flight. Four samples of each block are loaded at once and turned into four samples' lanes
/// (transpose_four), the samples past the last four gathered one by one. Compiled for AVX2 and the
/// baseline (synthesis/kernel_clones.hpp: no FMA).
WANE_KERNEL_CLONES
void flat_sums_of_four(const double* __restrict re, const double* __restrict im, std::size_t block, cplx* __restrict z,
                       cplx* __restrict z1) {
    const double half = 0.5 * static_cast<double>(block - 1);
    lanes zr{}, zi{}, z1r{}, z1i{};
    std::size_t j = 0;
    for (; j + 4 <= block; j += 4) {
        std::array<lanes, 4> r, i;
        std::memcpy(&r[0], re + j, sizeof(lanes)), std::memcpy(&i[0], im + j, sizeof(lanes));
        std::memcpy(&r[1], re + j + block, sizeof(lanes)), std::memcpy(&i[1], im + j + block, sizeof(lanes));
        std::memcpy(&r[2], re + j + 2 * block, sizeof(lanes)), std::memcpy(&i[2], im + j + 2 * block, sizeof(lanes));
        std::memcpy(&r[3], re + j + 3 * block, sizeof(lanes)), std::memcpy(&i[3], im + j + 3 * block, sizeof(lanes));
        transpose_four(r[0], r[1], r[2], r[3]);
        transpose_four(i[0], i[1], i[2], i[3]);
        for (std::size_t k = 0; k < 4; ++k) {
            const double offset = static_cast<double>(j + k) - half;
            zr += r[k], zi += i[k];
            z1r += offset * r[k], z1i += offset * i[k];
        }
    }
    for (; j < block; ++j) {
        const double offset = static_cast<double>(j) - half;
        const lanes r{re[j], re[j + block], re[j + 2 * block], re[j + 3 * block]};
        const lanes i{im[j], im[j + block], im[j + 2 * block], im[j + 3 * block]};
        zr += r, zi += i;
        z1r += offset * r, z1i += offset * i;
    }
    for (std::size_t k = 0; k < 4; ++k) z[k] = {zr[k], zi[k]}, z1[k] = {z1r[k], z1i[k]};
}

/// t's terms for the blocks before upto (made from t.decay where not made yet; the same numbers
/// as made all at once).
void fill_terms(glide_terms& t, std::size_t upto) {
    if (t.filled >= upto) return;
    const std::size_t n = upto - t.filled;
    glide_terms_at_decays(t.cents, t.glide_s, t.decay.subspan(t.filled, n),
                          std::span<double>(t.remaining_rad_per_hz).subspan(t.filled, n),
                          std::span<double>(t.excess).subspan(t.filled, n));
    t.filled = upto;
}

/// Each block's term of S for b < count: e^(-j g_b) (Z_b - j g'_b Z1_b) with g_b = freq_hz
/// (whole_rad_per_hz - remaining_rad_per_hz[b]) and g'_b = rad_per_frame excess[b], its real and
/// imaginary parts (z, z1: the blocks' sums, re and im interleaved as std::complex keeps them).
/// Element-wise (no reduction: projection adds the terms in block order, each term formed as the
/// sum had formed it), one vector loop compiled for AVX2 and for the baseline
/// (synthesis/kernel_clones.hpp: no FMA, element-wise IEEE operations, the same bits).
WANE_KERNEL_CLONES
void block_terms(double freq_hz, double whole_rad_per_hz, const double* __restrict remaining_rad_per_hz,
                 const double* __restrict excess, double rad_per_frame, const double* __restrict z,
                 const double* __restrict z1, std::size_t count, double* __restrict term_re, double* __restrict term_im) {
    for (std::size_t b = 0; b < count; ++b) {
        double sin_g = 0.0, cos_g = 1.0;
        sincos_poly(freq_hz * (whole_rad_per_hz - remaining_rad_per_hz[b]), sin_g, cos_g);
        const double slope = rad_per_frame * excess[b];  // g' per frame
        // a = Z - j slope Z1; (cos g - j sin g) a.
        const double a_re = z[2 * b] + slope * z1[2 * b + 1];
        const double a_im = z[2 * b + 1] - slope * z1[2 * b];
        term_re[b] = cos_g * a_re + sin_g * a_im;
        term_im[b] = cos_g * a_im - sin_g * a_re;
    }
}

/// Blocks summed between two looks at projection's bound.
constexpr std::size_t bound_chunk_blocks = 8;
/// The bound's padding, relative: far above the rounding of the sums it bounds (a few ulps per
/// block), so a candidate it rejects would have come out under the floor had it been summed.
constexpr double bound_margin = 1e-9;

/// S(c0, tau) from the block sums (onset_glide.hpp): sum_b e^(-j g_b) (Z_b - j g'_b Z1_b) with
/// g_b = f (G - R(t_b)) / f and g'_b = 2 pi f / fs times the excess (per frame); none once it is
/// clear that |S|^2 < floor_norm. The blocks are summed in order, bound_chunk_blocks at a time;
/// before the first and after each stretch |S| <= |sum so far| + sum over the blocks left of (|Z_b| + |g'_b| |Z1_b|),
/// |g'_b| there at most its value at the first block left (the excess shrinks with the decay):
/// the tail sums once per partial (block_sums::tail_z) bound every candidate's rest.
std::optional<cplx> projection(const block_sums& s, double freq_hz, glide_terms& t, double rate_hz,
                               double floor_norm, const decay_tails* tails, std::vector<double>& scratch) {
    if (t.cents == 0.0) return std::accumulate(s.z.begin(), s.z.end(), cplx{});
    const std::size_t count = s.z.size();
    assert(t.excess.size() == count && (!(floor_norm > 0.0) || s.tail_z.size() == count + 1));
    assert(!tails || (tails->z.size() == count + 1 && tails->z1.size() == count + 1 && s.tail_sum.size() == count + 1));
    scratch.resize(2 * count);
    double* term_re = scratch.data();
    double* term_im = scratch.data() + count;
    const double rad_per_frame = two_pi * freq_hz / rate_hz;
    if (!(floor_norm > 0.0) || count == 0) tails = nullptr;
    // The settled bound's terms (evaluate_above): e^(-j G), the decay tails' weights, the padding.
    double settled_re = 0.0, settled_im = 0.0, turn_weight = 0.0, slope_weight = 0.0, settled_pad = 0.0;
    // The first stretch's terms and the next block's excess (the bound's), made at once.
    if (count > 0) fill_terms(t, std::min(count, bound_chunk_blocks + 1));
    bool settled_made = false;  // the settled bound's terms are made as it is first needed
    // Whether no sum whose blocks before b1 summed to (re, im) reaches floor_norm.
    const auto under_floor = [&](std::size_t b1, double re, double im) {
        const double loose = (std::sqrt(re * re + im * im) + s.tail_z[b1] + std::abs(rad_per_frame * t.excess[b1]) * s.tail_z1[b1]) *
                             (1.0 + bound_margin);
        if (loose * loose < floor_norm) return true;
        if (!tails) return false;
        if (!settled_made) {
            const double whole_rad = freq_hz * t.whole_rad_per_hz;
            sincos_poly(-whole_rad, settled_im, settled_re);
            if (t.excess_bound < 0.0) t.excess_bound = excess_bound_at(t.cents);
            turn_weight = two_pi * freq_hz * t.glide_s * t.excess_bound;
            slope_weight = rad_per_frame * t.excess_bound;
            settled_pad = bound_margin * (s.tail_z[0] + std::abs(rad_per_frame * t.excess[0]) * s.tail_z1[0]);
            settled_made = true;
        }
        const cplx rest = s.tail_sum[b1];
        const double sum_re = re + settled_re * rest.real() - settled_im * rest.imag();
        const double sum_im = im + settled_re * rest.imag() + settled_im * rest.real();
        const double settled = std::sqrt(sum_re * sum_re + sum_im * sum_im) + turn_weight * tails->z[b1] +
                               slope_weight * tails->z1[b1] + settled_pad;
        return settled * settled < floor_norm;
    };
    // The bound before any block is summed.
    if (floor_norm > 0.0 && count > 0 && under_floor(0, 0.0, 0.0)) return std::nullopt;
    double re = 0.0, im = 0.0;
    for (std::size_t b0 = 0; b0 < count; b0 += bound_chunk_blocks) {
        const std::size_t b1 = std::min(count, b0 + bound_chunk_blocks);
        fill_terms(t, std::min(count, b1 + 1));  // b1's excess for the bound
        block_terms(freq_hz, t.whole_rad_per_hz, t.remaining_rad_per_hz.data() + b0, t.excess.data() + b0, rad_per_frame,
                    reinterpret_cast<const double*>(s.z.data() + b0), reinterpret_cast<const double*>(s.z1.data() + b0), b1 - b0,
                    term_re + b0, term_im + b0);
        for (std::size_t b = b0; b < b1; ++b) re += term_re[b], im += term_im[b];
        if (b1 == count || !(floor_norm > 0.0)) continue;
        if (under_floor(b1, re, im)) return std::nullopt;
    }
    return cplx{re, im};
}

}  // namespace

void heterodyne_into(std::span<const double> y, double freq_hz, double rate_hz, heterodyned& z) {
    z.re.resize(y.size());
    z.im.resize(y.size());
    heterodyne(y.data(), y.size(), freq_hz / rate_hz, z.re.data(), z.im.data());
}

heterodyned heterodyne(std::span<const double> y, double freq_hz, double rate_hz) {
    heterodyned z;
    heterodyne_into(y, freq_hz, rate_hz, z);
    return z;
}

/// The block sums with a = 1 (flat), from z.
block_sums sum_flat(const heterodyned& z, double rate_hz, std::size_t block) {
    block_sums flat;
    const std::size_t blocks = z.re.size() / block;
    flat.z.resize(blocks);
    flat.z1.resize(blocks);
    flat.centre_s.resize(blocks);
    // Each block summed in sample order (flat_sums: four blocks side by side, then one at a time).
    std::size_t b = 0;
    for (; b + 4 <= blocks; b += 4) flat_sums_of_four(z.re.data() + b * block, z.im.data() + b * block, block, flat.z.data() + b, flat.z1.data() + b);
    for (; b < blocks; ++b) flat_sums_of_one(z.re.data() + b * block, z.im.data() + b * block, block, flat.z[b], flat.z1[b]);
    for (b = 0; b < blocks; ++b) {
        const double centre = static_cast<double>(b * block) + 0.5 * static_cast<double>(block - 1);
        flat.band_energy += 2.0 * std::norm(flat.z[b]) / static_cast<double>(block);
        flat.centre_s[b] = centre / rate_hz;
    }
    flat.amp_energy = static_cast<double>(blocks * block);  // sum of a^2 = 1 per sample (exact)
    add_tails(flat);
    return flat;
}

/// The block sums with a = q's envelope amplitude times gain_lin (shaped), from z: made only for
/// a glide that is kept (its C).
block_sums sum_shaped(const heterodyned& z, const partial& q, double gain_lin, double rate_hz, std::size_t block) {
    block_sums shaped;
    // The envelope's amplitude (core/envelope.hpp's definition), its pieces made once.
    const std::vector<envelope_piece> pieces = envelope_pieces(q.env);
    const double peak_lin = to_amp(q.env.peak).lin;
    std::size_t piece = 0;
    // The decay's amplitude: exact at a block's first sample and where a piece starts, then the
    // sample before times the piece's ratio per sample, 10^(slope / fs / 20) (a relative error of
    // a few ulps over a block, against one power per sample).
    double decay_amp = -1.0;  // the previous sample's (none: -1)
    double step_ratio = 1.0;
    const auto amp_at = [&](double t) {
        if (t < q.env.attack_s) {
            decay_amp = -1.0;
            return peak_lin * t / q.env.attack_s;
        }
        const std::size_t was = piece;
        while (piece + 1 < pieces.size() && t >= pieces[piece].end_s) ++piece;
        const envelope_piece& e = pieces[piece];
        if (decay_amp < 0.0 || piece != was) {
            decay_amp = to_amp(level_db{e.start_level.db + e.slope_db_per_s * (t - e.start_s)}).lin;
            step_ratio = to_amp(level_db{e.slope_db_per_s / rate_hz}).lin;
        } else {
            decay_amp *= step_ratio;
        }
        return decay_amp;
    };
    for (std::size_t b0 = 0; b0 + block <= z.re.size(); b0 += block) {
        const double centre = static_cast<double>(b0) + 0.5 * static_cast<double>(block - 1);
        cplx zs{}, z1s{};
        decay_amp = -1.0;  // exact again at each block's start
        std::size_t n = b0;
        const auto add = [&](double a) {  // sample n's terms (a * zn, then (offset a) * zn, as complex products)
            const double offset = static_cast<double>(n) - centre;
            zs += a * cplx(z.re[n], z.im[n]);
            z1s += offset * a * cplx(z.re[n], z.im[n]);
            shaped.amp_energy += a * a;
        };
        add(gain_lin * amp_at(static_cast<double>(n) / rate_hz));
        // A block past the attack within one piece: amp_at's path for its other samples is the
        // sample before times step_ratio (its tests would pass the same way): taken directly.
        const double last_s = static_cast<double>(b0 + block - 1) / rate_hz;
        if (!(static_cast<double>(b0) / rate_hz < q.env.attack_s) && (piece + 1 >= pieces.size() || last_s < pieces[piece].end_s)) {
            for (++n; n < b0 + block; ++n) {
                decay_amp *= step_ratio;
                add(gain_lin * decay_amp);
            }
        } else {
            for (++n; n < b0 + block; ++n) add(gain_lin * amp_at(static_cast<double>(n) / rate_hz));
        }
        shaped.band_energy += 2.0 * std::norm(zs) / static_cast<double>(block);
        shaped.z.push_back(zs);
        shaped.z1.push_back(z1s);
        shaped.centre_s.push_back(centre / rate_hz);
    }
    return shaped;
}

/// The block sums of blocks twice as long (pairs merged, Z1 moved to the pair's centre): the
/// coarse search's, where the glide's second-order term may be 4 times the fine blocks'.
block_sums merged_pairs(const block_sums& s, double rate_hz) {
    block_sums out;
    out.amp_energy = s.amp_energy;
    out.band_energy = s.band_energy;
    out.z.reserve(s.z.size() / 2);
    out.z1.reserve(s.z.size() / 2);
    out.centre_s.reserve(s.z.size() / 2);
    for (std::size_t b = 0; b + 1 < s.z.size(); b += 2) {
        const double centre_s = 0.5 * (s.centre_s[b] + s.centre_s[b + 1]);
        const double half_frames = 0.5 * (s.centre_s[b + 1] - s.centre_s[b]) * rate_hz;
        out.z.push_back(s.z[b] + s.z[b + 1]);
        out.z1.push_back(s.z1[b] - half_frames * s.z[b] + s.z1[b + 1] + half_frames * s.z[b + 1]);
        out.centre_s.push_back(centre_s);
    }
    add_tails(out);
    return out;
}

double excess_bound_at(double cents) { return std::expm1(std::abs(cents) * std::numbers::ln2 / 1200.0); }

glide_terms terms_at(double cents, double glide_s, std::span<const double> decay) {
    glide_terms out{.cents = cents, .glide_s = glide_s,
                    .whole_rad_per_hz = glide_remaining_phase_at_decay_rad(1.0, cents, glide_s, 1.0),
                    .remaining_rad_per_hz = std::vector<double>(decay.size()), .excess = std::vector<double>(decay.size())};
    glide_terms_at_decays(cents, glide_s, decay, out.remaining_rad_per_hz, out.excess);
    out.filled = decay.size();
    return out;
}

void tails_into(const block_sums& s, std::span<const double> decay, decay_tails& out) {
    const std::size_t count = s.z.size();
    assert(decay.size() == count && s.abs_z.size() == count);
    out.z.resize(count + 1);
    out.z1.resize(count + 1);
    out.z[count] = 0.0;
    out.z1[count] = 0.0;
    for (std::size_t b = count; b-- > 0;) {
        out.z[b] = out.z[b + 1] + decay[b] * s.abs_z[b];
        out.z1[b] = out.z1[b + 1] + decay[b] * s.abs_z1[b];
    }
}

decay_tails tails_at(const block_sums& s, std::span<const double> decay) {
    decay_tails out;
    tails_into(s, decay, out);
    return out;
}

/// e^(-t_b / tau) at the blocks' centres.
std::vector<double> decays(const block_sums& s, double glide_s) {
    std::vector<double> out(s.centre_s.size());
    for (std::size_t b = 0; b < out.size(); ++b) out[b] = std::exp(-s.centre_s[b] / glide_s);
    return out;
}

/// The fit at t, or none when it explains less than floor_explained (a bound shows it before the
/// whole sum: projection).
std::optional<glide_fit> evaluate_above(const block_sums& s, double freq_hz, glide_terms& t, double rate_hz,
                                        double floor_explained, const decay_tails* tails) {
    thread_local std::vector<double> scratch;  // the blocks' terms, kept between calls
    const std::optional<cplx> sum = projection(s, freq_hz, t, rate_hz, 0.5 * floor_explained * s.amp_energy, tails, scratch);
    if (!sum) return std::nullopt;
    return glide_fit{.cents = t.cents, .glide_s = t.glide_s, .explained = 2.0 * std::norm(*sum) / s.amp_energy,
                     .amp = 2.0 * *sum / s.amp_energy};
}

glide_fit evaluate(const block_sums& s, double freq_hz, glide_terms& t, double rate_hz) {
    return *evaluate_above(s, freq_hz, t, rate_hz, -infinity);
}

glide_fit evaluate(const block_sums& s, double freq_hz, double cents, double glide_s, double rate_hz) {
    glide_terms t = cents == 0.0 ? glide_terms{} : terms_at(cents, glide_s, decays(s, glide_s));
    return evaluate(s, freq_hz, t, rate_hz);
}

}  // namespace wane::glide_projection

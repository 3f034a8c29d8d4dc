#include "modes/damped_mode.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <limits>
#include <optional>
#include <vector>

#include <Eigen/Dense>

#include "core/units.hpp"
#include "modes/cholesky.hpp"
#include "modes/fit_memo.hpp"
#include "modes/mode_projection.hpp"
#include "modes/mode_shape.hpp"

namespace wane {

std::complex<double> complex_expm1(std::complex<double> a) {
    // expm1(re) cos(im) - 2 sin^2(im / 2) + i e^re sin(im): no cancellation for small |a|.
    const double s = std::sin(0.5 * a.imag());
    return {std::expm1(a.real()) * std::cos(a.imag()) - 2.0 * s * s, std::exp(a.real()) * std::sin(a.imag())};
}

std::complex<double> geometric_sum(std::complex<double> a, double count) {
    // A multiple of 2 pi in the imaginary part is the same z; fold it so expm1(a) is not 0 there.
    const double folded_im = std::remainder(a.imag(), two_pi);
    a = {a.real(), folded_im};
    if (std::abs(a) < 1e-14) return {count, 0.0};
    return complex_expm1(count * a) / complex_expm1(a);
}

namespace {

/// A mode whose shape is one plain exponential over the whole span (start 0, power 0): its
/// sample ratio z = exp(rho + i w) and z^count, each from the exact power.
struct plain_power {
    bool plain = false;
    double scale = 0.0;
    std::complex<double> z{}, z_count{};
};

std::vector<plain_power> plain_powers(std::span<const mode_shape> own, std::span<const double> omega, std::size_t count) {
    std::vector<plain_power> out(own.size());
    const auto n = static_cast<double>(count);
    for (std::size_t k = 0; k < own.size(); ++k) {
        if (own[k].size() != 1) continue;
        const shape_piece& piece = own[k].front();
        if (piece.start != 0 || piece.power != 0 || piece.count != count) continue;
        out[k] = {.plain = true, .scale = piece.scale,
                  .z = std::exp(std::complex<double>{piece.rho, omega[k]}),
                  .z_count = std::exp(std::complex<double>{piece.rho * n, std::remainder(omega[k] * n, two_pi)})};
    }
    return out;
}

/// Below this |E - 1| the product form's subtraction loses more than 3 of 16 digits (its error
/// is about 1e-16 / |E - 1| relative, the size of the closed form's own rounding of the phase at
/// |mu| = 1e-3): the pair takes the closed form (shape_pair_sum) instead.
constexpr double min_plain_distance = 1e-3;

/// sum_{n < count} a_j[n] a_k[n] exp(i (w_j +- w_k) n) of two plain modes as the geometric series
/// (E^count - 1) / (E - 1), E = z_j z_k (or z_j conj z_k with conj_k): a few multiplications in
/// place of shape_pair_sum's transcendental calls. Empty when E is too close to 1.
std::optional<std::complex<double>> plain_pair_sum(const plain_power& a, const plain_power& b, bool conj_k) {
    const std::complex<double> e = conj_k ? a.z * std::conj(b.z) : a.z * b.z;
    const std::complex<double> em1 = e - 1.0;
    if (std::norm(em1) < min_plain_distance * min_plain_distance) return std::nullopt;
    const std::complex<double> e_count = conj_k ? a.z_count * std::conj(b.z_count) : a.z_count * b.z_count;
    return a.scale * b.scale * (e_count - 1.0) / em1;
}

/// The Gram matrix of the model's real columns for modes with sample shapes `own` and angular
/// frequencies `omega` (rad per sample), in closed form (2K x 2K, K = own.size()): the columns of
/// modes first_mode .. K - 1 and their mirror rows (all of it for first_mode 0). The pairs `reuse`
/// copies are taken from the old matrix (both 2 x 2 blocks, as this fill wrote them there).
void fill_gram(std::span<const mode_shape> own, std::span<const double> omega, std::size_t count,
               std::size_t first_mode, Eigen::Ref<Eigen::MatrixXd> gram, const gram_reuse* reuse = nullptr) {
    const auto k_count = own.size();
    // Unknowns: theta = [a_0, b_0, a_1, b_1, ...] with amp_k = a_k + i b_k, so the model's columns
    // are u_k[n] = Re p_k[n] and v_k[n] = -Im p_k[n]. With p = p_j[n], q = p_k[n]:
    //   Re p Re q = Re(p q + p conj q) / 2,  Im p Im q = Re(p conj q - p q) / 2,
    //   Re p Im q = Im(p q - p conj q) / 2,  Im p Re q = Im(p q + p conj q) / 2,
    // and sum p q = sum a_j a_k exp(i (w_j + w_k) n), sum p conj q the same with w_j - w_k.
    const std::vector<plain_power> plain = plain_powers(own, omega, count);
    const auto pair_sum = [&](std::size_t j, std::size_t k, bool conj_k) {
        if (plain[j].plain && plain[k].plain) {
            if (const auto s = plain_pair_sum(plain[j], plain[k], conj_k)) return *s;
        }
        return shape_pair_sum(own[j], own[k], {0.0, conj_k ? omega[j] - omega[k] : omega[j] + omega[k]});
    };
    for (std::size_t k = first_mode; k < k_count; ++k) {
        for (std::size_t j = 0; j <= k; ++j) {
            if (reuse != nullptr && reuse->copies(j, k)) {
                const std::ptrdiff_t a = 2 * reuse->old_of[j], b = 2 * reuse->old_of[k];
                const auto a_j = static_cast<Eigen::Index>(2 * j), a_k = static_cast<Eigen::Index>(2 * k);
                for (Eigen::Index r = 0; r < 2; ++r)
                    for (Eigen::Index c = 0; c < 2; ++c) {
                        gram(a_j + r, a_k + c) = reuse->at(a + r, b + c);
                        gram(a_k + r, a_j + c) = reuse->at(b + r, a + c);
                    }
                continue;
            }
            const std::complex<double> s_pq = pair_sum(j, k, false);
            const std::complex<double> s_pcq = pair_sum(j, k, true);
            const double uu = 0.5 * (s_pq.real() + s_pcq.real());
            const double vv = 0.5 * (s_pcq.real() - s_pq.real());
            const double u_j_im_k = 0.5 * (s_pq.imag() - s_pcq.imag());  // sum Re p_j Im p_k
            const double im_j_u_k = 0.5 * (s_pq.imag() + s_pcq.imag());  // sum Im p_j Re p_k
            const auto a_j = static_cast<Eigen::Index>(2 * j), a_k = static_cast<Eigen::Index>(2 * k);
            gram(a_j, a_k) = uu;
            gram(a_j + 1, a_k + 1) = vv;
            gram(a_j, a_k + 1) = -u_j_im_k;
            gram(a_j + 1, a_k) = -im_j_u_k;
            gram(a_k, a_j) = uu;
            gram(a_k + 1, a_j + 1) = vv;
            gram(a_k + 1, a_j) = -u_j_im_k;
            gram(a_k, a_j + 1) = -im_j_u_k;
        }
    }
}

/// Each mode's shape over count samples (exp(-d n / fs) where shapes[k] is empty) and angular frequency (rad per sample).
void own_shapes(std::span<const damped_mode> modes, std::span<const mode_shape> shapes, double sample_rate_hz,
                std::size_t count, std::vector<mode_shape>& own, std::vector<double>& omega) {
    own.resize(modes.size());
    omega.resize(modes.size());
    for (std::size_t k = 0; k < modes.size(); ++k) {
        assert(modes[k].freq_hz >= 0.0 && modes[k].freq_hz <= 0.5 * sample_rate_hz);
        omega[k] = two_pi * modes[k].freq_hz / sample_rate_hz;
        own[k] = shapes.empty() || shapes[k].empty() ? exponential_shape(-modes[k].decay_per_s / sample_rate_hz, count) : shapes[k];
        assert(std::all_of(own[k].begin(), own[k].end(),
                           [&](const shape_piece& piece) { return piece.start + piece.count <= count; }));
    }
}

/// The first modes of `modes` are factor.modes (bitwise: freq_hz and decay_per_s), count and rate
/// agree, and its factorization succeeded.
bool leads(const plain_gram_factor& factor, std::span<const damped_mode> modes, double sample_rate_hz, std::size_t count) {
    if (factor.lower.empty() || factor.count != count || factor.sample_rate_hz != sample_rate_hz ||
        factor.modes.size() > modes.size())
        return false;
    return std::equal(factor.modes.begin(), factor.modes.end(), modes.begin(), [](const damped_mode& a, const damped_mode& b) {
        return a.freq_hz == b.freq_hz && a.decay_per_s == b.decay_per_s;
    });
}

/// The projections of x on the model's real columns (2K): sum x[n] a_k[n] exp(i w_k n). A
/// decaying mode: x times its damped phasor; a shaped one: x times its samples, times the phasor.
/// A mode with known_at[k] >= 0 (when known_at is not empty) takes known_rhs's pair at that index.
Eigen::VectorXd shape_projections(std::span<const float> x, double sample_rate_hz, std::span<const damped_mode> modes,
                                  std::span<const mode_shape> shapes, std::span<const mode_shape> own,
                                  std::span<const double> omega, std::span<const std::ptrdiff_t> known_at,
                                  std::span<const double> known_rhs) {
    const auto k_count = modes.size();
    const auto n_count = x.size();
    const auto known = [&](std::size_t k) { return !known_at.empty() && known_at[k] >= 0; };
    std::vector<double> rho(k_count, 0.0);
    std::vector<std::size_t> plain;
    for (std::size_t k = 0; k < k_count; ++k) {
        if (!shapes[k].empty() || known(k)) continue;
        rho[k] = -modes[k].decay_per_s / sample_rate_hz;
        plain.push_back(k);
    }
    std::vector<std::complex<double>> sums(k_count);
    std::vector<double> weighted(x.begin(), x.end());
    // In groups of chains whatever the count: a mode's projection is then the same numbers in
    // every fit (the memo copies it from the last fit, modes/fit_memo.hpp).
    for (std::size_t i = 0; i < plain.size(); i += projection_group)
        project_group(weighted, std::span(plain).subspan(i, std::min(projection_group, plain.size() - i)), rho, omega, sums);
    std::vector<double> amp;
    for (std::size_t k = 0; k < k_count; ++k) {
        if (shapes[k].empty() || known(k)) continue;
        shape_samples(own[k], n_count, amp);
        for (std::size_t n = 0; n < n_count; ++n) weighted[n] = double(x[n]) * amp[n];
        const std::size_t one[] = {k};
        project_group(weighted, one, rho, omega, sums);
    }
    Eigen::VectorXd rhs(static_cast<Eigen::Index>(2 * k_count));
    for (std::size_t k = 0; k < k_count; ++k) {
        const auto at = static_cast<Eigen::Index>(2 * k);
        if (known(k)) {
            rhs(at) = known_rhs[2 * static_cast<std::size_t>(known_at[k])];
            rhs(at + 1) = known_rhs[2 * static_cast<std::size_t>(known_at[k]) + 1];
        } else {
            rhs(at) = sums[k].real();
            rhs(at + 1) = -sums[k].imag();
        }
    }
    return rhs;
}

/// G theta = rhs by a Cholesky factor L of G in the lower triangle of `lower`: L y = theta, then
/// L^T theta = y, in place (theta holds rhs on entry).
void solve_with_lower(const Eigen::Ref<const Eigen::MatrixXd>& lower, Eigen::VectorXd& theta) {
    lower.triangularView<Eigen::Lower>().solveInPlace(theta);
    lower.transpose().triangularView<Eigen::Upper>().solveInPlace(theta);
}

/// solve_with_lower on a kept factor (factor_plain_gram).
void solve_on_factor(const plain_gram_factor& factor, Eigen::VectorXd& theta) {
    solve_with_lower(Eigen::Map<const Eigen::MatrixXd>(factor.lower.data(), theta.size(), theta.size()), theta);
}

}  // namespace

double fit_mode_amplitudes(std::span<const float> x, double sample_rate_hz, std::span<damped_mode> modes,
                           double ridge_rel) {
    const std::vector<mode_shape> none(modes.size());
    return fit_shaped_amplitudes(x, sample_rate_hz, modes, none, ridge_rel);
}

plain_gram_factor factor_plain_gram(std::span<const damped_mode> modes, double sample_rate_hz, std::size_t count,
                                    double ridge_rel) {
    assert(sample_rate_hz > 0.0);
    plain_gram_factor out{.modes = {modes.begin(), modes.end()}, .count = count, .sample_rate_hz = sample_rate_hz,
                          .ridge_rel = ridge_rel, .ridge = 0.0, .gram = {}, .lower = {}};
    std::vector<mode_shape> own;
    std::vector<double> omega;
    own_shapes(modes, {}, sample_rate_hz, count, own, omega);
    const auto dim = static_cast<Eigen::Index>(2 * modes.size());
    out.gram.resize(static_cast<std::size_t>(dim * dim));
    const Eigen::Map<Eigen::MatrixXd> gram(out.gram.data(), dim, dim);
    fill_gram(own, omega, count, 0, gram);
    out.ridge = dim > 0 ? ridge_rel * gram.diagonal().mean() : 0.0;
    out.lower = out.gram;
    Eigen::Map<Eigen::MatrixXd> lower(out.lower.data(), dim, dim);
    lower.diagonal().array() += out.ridge;
    // In place: the lower triangle becomes the factor (modes/cholesky.hpp).
    if (!cholesky_in_place(lower)) out.lower.clear();
    return out;
}

double fit_shaped_amplitudes(std::span<const float> x, double sample_rate_hz, std::span<damped_mode> modes,
                             std::span<const mode_shape> shapes, double ridge_rel, plain_gram_factor* known,
                             shaped_fit_memo* memo) {
    assert(sample_rate_hz > 0.0);
    assert(shapes.size() == modes.size());
    const auto k_count = modes.size();
    const auto n_count = x.size();
    double energy = 0.0;
    for (float v : x) energy += double(v) * double(v);
    if (k_count == 0 || n_count == 0 || energy <= 0.0) {
        for (auto& m : modes) m.amp = {};
        return 1.0;
    }
    // Mode k is p_k[n] = a_k[n] exp(i w_k n): a_k its shape, or exp(-d_k n / fs) when none is given.
    std::vector<mode_shape> own;
    std::vector<double> omega;
    own_shapes(modes, shapes, sample_rate_hz, n_count, own, omega);
    std::vector<char> plain(k_count);
    for (std::size_t k = 0; k < k_count; ++k) plain[k] = shapes[k].empty() ? 1 : 0;
    // The last fit's entries for the modes it shares with this one (modes/fit_memo.hpp).
    const shaped_fit_memo none{};
    const shaped_fit_memo& last = memo != nullptr ? *memo : none;
    const std::vector<std::ptrdiff_t> old_of = memo_matches(last, own, omega, plain, n_count, sample_rate_hz);
    const bool same_samples = memo_same_samples(last, x);  // (then the memo keeps its samples as they are)
    const std::span<const std::ptrdiff_t> rhs_known = same_samples ? std::span(old_of) : std::span<const std::ptrdiff_t>{};
    const Eigen::VectorXd rhs = shape_projections(x, sample_rate_hz, modes, shapes, own, omega, rhs_known, last.rhs);
    const auto dim = static_cast<Eigen::Index>(2 * k_count);
    Eigen::VectorXd theta, g_theta;  // the solution and G theta (G without the ridge)
    std::vector<double> gram_exact;  // column-major, dim x dim (kept for the memo)
    const bool reuse = known != nullptr && known->modes.size() == k_count && known->ridge_rel == ridge_rel &&
                       std::all_of(shapes.begin(), shapes.end(), [](const mode_shape& a) { return a.empty(); }) &&
                       leads(*known, modes, sample_rate_hz, n_count);
    if (reuse) {
        theta = rhs;
        solve_on_factor(*known, theta);
        g_theta = Eigen::Map<const Eigen::MatrixXd>(known->gram.data(), dim, dim) * theta;
        if (memo != nullptr) gram_exact = std::move(known->gram);
    } else {
        gram_exact.resize(static_cast<std::size_t>(dim * dim));
        const Eigen::Map<Eigen::MatrixXd> exact(gram_exact.data(), dim, dim);
        const std::vector<std::ptrdiff_t> gram_of = gram_matches(last, old_of);
        const gram_reuse from{.old_of = gram_of, .old = last.gram.data(), .old_dim = 2 * last.gram_modes};
        fill_gram(own, omega, n_count, 0, exact, &from);
        const double ridge = ridge_rel * exact.diagonal().mean();
        // Cholesky in place (modes/cholesky.hpp) on a copy of the lower triangle, all it reads; LDLT should rounding fail it.
        Eigen::MatrixXd gram(dim, dim);
        gram.triangularView<Eigen::Lower>() = exact;
        gram.diagonal().array() += ridge;
        if (cholesky_in_place(gram)) {
            theta = rhs;
            solve_with_lower(gram, theta);
        } else {
            gram = exact;
            gram.diagonal().array() += ridge;
            theta = gram.ldlt().solve(rhs);
        }
        g_theta = exact * theta;
    }
    for (std::size_t k = 0; k < k_count; ++k)
        modes[k].amp = {theta(static_cast<Eigen::Index>(2 * k)), theta(static_cast<Eigen::Index>(2 * k + 1))};
    // Residual energy = |x|^2 - 2 theta.rhs + theta' G theta.
    const double residual = energy - 2.0 * theta.dot(rhs) + theta.dot(g_theta);
    if (memo != nullptr) {
        *memo = {.count = n_count, .sample_rate_hz = sample_rate_hz,
                 .x = same_samples ? std::move(memo->x) : std::vector<float>(x.begin(), x.end()), .own = std::move(own),
                 .omega = std::move(omega), .plain = std::move(plain), .gram = std::move(gram_exact),
                 .rhs = {rhs.data(), rhs.data() + dim}, .gram_modes = k_count};
    }
    return std::clamp(residual / energy, 0.0, 1.0);
}

void fit_mode_amplitude_sets(std::span<const float> x, double sample_rate_hz,
                             std::span<std::optional<std::vector<damped_mode>>> sets) {
    std::vector<double> rho, omega;
    for (const auto& set : sets) {
        if (!set) continue;
        for (const damped_mode& m : *set)
            rho.push_back(-m.decay_per_s / sample_rate_hz), omega.push_back(two_pi * m.freq_hz / sample_rate_hz);
    }
    // A silent x (fit_mode_amplitudes's case of no energy): any sample not 0 has energy.
    const bool silent = std::all_of(x.begin(), x.end(), [](float v) { return v == 0.0F; });
    if (rho.empty() || silent) {
        for (auto& set : sets)
            if (set) fit_mode_amplitudes(x, sample_rate_hz, *set);  // its own answer for a silent x
        return;
    }
    std::vector<std::complex<double>> sums(rho.size());
    project_modes(x, x.size(), rho, omega, sums);
    std::size_t at = 0;
    for (auto& set : sets) {
        if (!set) continue;
        const plain_gram_factor factor = factor_plain_gram(*set, sample_rate_hz, x.size());
        if (factor.lower.empty()) {
            fit_mode_amplitudes(x, sample_rate_hz, *set);  // its fallback for a failed factor
        } else {
            // rhs: Re P_k and -Im P_k (the model's real columns).
            Eigen::VectorXd theta(static_cast<Eigen::Index>(2 * set->size()));
            for (std::size_t k = 0; k < set->size(); ++k) {
                theta(static_cast<Eigen::Index>(2 * k)) = sums[at + k].real();
                theta(static_cast<Eigen::Index>(2 * k + 1)) = -sums[at + k].imag();
            }
            solve_on_factor(factor, theta);
            for (std::size_t k = 0; k < set->size(); ++k)
                (*set)[k].amp = {theta(static_cast<Eigen::Index>(2 * k)), theta(static_cast<Eigen::Index>(2 * k + 1))};
        }
        at += set->size();
    }
}

namespace {

/// The Cholesky factor L (lower triangle) of the ridged Gram matrix of the sliding fit's plain
/// modes; empty when the factorization fails. With params.leading ahead of the modes, its factor
/// L11 is extended: with G = [G11 G12; G21 G22] (G11 its modes' block),
///   L21 = (L11^-1 G12)^T,  L22 L22^T = G22 + ridge I - L21 L21^T.
Eigen::MatrixXd sliding_factor(std::span<const damped_mode> modes, std::span<const mode_shape> own,
                               std::span<const double> omega, double sample_rate_hz, std::size_t count,
                               const sliding_fit_params& params) {
    const auto dim = static_cast<Eigen::Index>(2 * modes.size());
    Eigen::MatrixXd gram(dim, dim);
    if (params.leading == nullptr || !leads(*params.leading, modes, sample_rate_hz, count)) {
        fill_gram(own, omega, count, 0, gram);
        gram.diagonal().array() += params.ridge_rel * gram.diagonal().mean();
        // In place: the lower triangle becomes the factor.
        return cholesky_in_place(gram) ? gram : Eigen::MatrixXd();
    }
    const plain_gram_factor& lead = *params.leading;
    const auto n1 = static_cast<Eigen::Index>(2 * lead.modes.size()), n2 = dim - n1;
    fill_gram(own, omega, count, lead.modes.size(), gram);  // the columns of the other modes (G12, G22)
    const Eigen::Map<const Eigen::MatrixXd> l11(lead.lower.data(), n1, n1);
    Eigen::MatrixXd l21t = gram.topRightCorner(n1, n2);
    l11.triangularView<Eigen::Lower>().solveInPlace(l21t);
    Eigen::MatrixXd rest = gram.bottomRightCorner(n2, n2);
    rest.diagonal().array() += lead.ridge;
    rest.noalias() -= l21t.transpose() * l21t;
    if (!cholesky_in_place(rest)) return {};
    gram.topLeftCorner(n1, n1) = l11;
    gram.bottomLeftCorner(n2, n1) = l21t.transpose();
    gram.bottomRightCorner(n2, n2) = rest;
    return gram;
}

}  // namespace

std::vector<double> sliding_fit_residuals(std::span<const float> x, double sample_rate_hz,
                                          std::span<const damped_mode> modes, std::size_t count, std::size_t starts,
                                          const sliding_fit_params& params) {
    assert(sample_rate_hz > 0.0 && count > 0);
    assert(x.size() + 1 >= starts + count);
    const auto k_count = modes.size();
    std::vector<double> out(starts, 0.0);
    // Energy of each span, sliding.
    double energy = 0.0;
    for (std::size_t n = 0; n < count && starts > 0; ++n) energy += double(x[n]) * double(x[n]);
    if (k_count == 0) {
        for (std::size_t s = 0; s < starts; ++s) {
            out[s] = energy;
            if (s + 1 < starts) energy += double(x[s + count]) * double(x[s + count]) - double(x[s]) * double(x[s]);
        }
        return out;
    }
    std::vector<mode_shape> own(k_count);
    std::vector<double> omega(k_count);
    std::vector<std::complex<double>> z(k_count), z_count(k_count), proj(k_count);
    std::vector<double> rho_of(k_count);
    for (std::size_t k = 0; k < k_count; ++k) {
        assert(modes[k].freq_hz >= 0.0 && modes[k].freq_hz <= 0.5 * sample_rate_hz);
        omega[k] = two_pi * modes[k].freq_hz / sample_rate_hz;
        const double rho = -modes[k].decay_per_s / sample_rate_hz;
        rho_of[k] = rho;
        own[k] = exponential_shape(rho, count);
        z[k] = std::exp(std::complex<double>{rho, omega[k]});
        z_count[k] = std::exp(std::complex<double>{rho * static_cast<double>(count),
                                                   std::remainder(omega[k] * static_cast<double>(count), two_pi)});
    }
    const Eigen::MatrixXd lower = sliding_factor(modes, own, omega, sample_rate_hz, count, params);
    // The explained energy theta.rhs = rhs' G^-1 rhs = |L^-1 rhs|^2 (0 when the factorization failed): the
    // projections of a block of starts, one column each, then one blocked triangular solve for the block.
    const bool solved = lower.size() > 0;
    const auto dim = static_cast<Eigen::Index>(2 * k_count);
    constexpr std::size_t block = 32, exact_every = 128;
    Eigen::MatrixXd rhs(dim, static_cast<Eigen::Index>(std::min(block, starts)));
    double before = 0.0, least_cost = std::numeric_limits<double>::infinity();  // |x[0, s)|^2; skip_dominated's
    for (std::size_t first = 0; first < starts; first += block) {
        if (params.skip_dominated && before >= least_cost) {
            std::fill(out.begin() + static_cast<std::ptrdiff_t>(first), out.end(), std::numeric_limits<double>::infinity());
            break;
        }
        const std::size_t cols = std::min(block, starts - first);
        for (std::size_t s = first; s < first + cols; ++s) {
            if (s % exact_every == 0) project_many(x.subspan(s, count), rho_of, omega, proj);
            const auto col = static_cast<Eigen::Index>(s - first);
            for (std::size_t k = 0; k < k_count; ++k) {
                rhs(static_cast<Eigen::Index>(2 * k), col) = proj[k].real();
                rhs(static_cast<Eigen::Index>(2 * k + 1), col) = -proj[k].imag();
            }
            out[s] = energy;
            if (s + 1 < starts) {
                const double leaving = x[s], entering = x[s + count];
                energy += entering * entering - leaving * leaving;
                for (std::size_t k = 0; k < k_count; ++k) proj[k] = (proj[k] - leaving + entering * z_count[k]) / z[k];
            }
        }
        auto part = rhs.leftCols(static_cast<Eigen::Index>(cols));
        if (solved) solve_lower_in_place(lower, part);
        for (std::size_t s = first; s < first + cols; ++s) {
            out[s] = std::max(0.0, out[s] - (solved ? part.col(static_cast<Eigen::Index>(s - first)).squaredNorm() : 0.0));
            least_cost = std::min(least_cost, before + out[s]);
            before += double(x[s]) * double(x[s]);
        }
    }
    return out;
}

}  // namespace wane

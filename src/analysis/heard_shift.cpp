#include "analysis/heard_shift.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <complex>
#include <numbers>
#include <vector>

#include "core/envelope.hpp"
#include "core/units.hpp"

namespace wane {

namespace {

/// Adds w(t) A(t) exp(i (2 pi ratio (f - centre) t + phi)) of one partial to z over the grid of
/// z.size() steps of step_s from start_s (w: the Hann window over the grid).
void add_baseband(const partial& q, double centre_hz, double ratio, double start_s, double step_s,
                  std::span<std::complex<double>> z) {
    const std::vector<envelope_piece> pieces = envelope_pieces(q.env);
    const double omega = 2.0 * std::numbers::pi * ratio * (q.freq_hz - centre_hz);
    const auto n = static_cast<double>(z.size());
    for (std::size_t i = 0; i < z.size(); ++i) {
        const double t = start_s + static_cast<double>(i) * step_s;
        const double hann = 0.5 - 0.5 * std::cos(2.0 * std::numbers::pi * (static_cast<double>(i) + 0.5) / n);
        const double amp = to_amp(envelope_level(q.env, pieces, t)).lin;
        z[i] += std::polar(hann * amp, omega * t + q.phase_rad);
    }
}

/// The top of a dB curve sampled on a grid (index), refined by the vertex of the parabola through
/// it and its neighbours; the top itself at the grid's edge.
double refined_top(std::span<const double> level_db) {
    const auto top = static_cast<std::size_t>(std::max_element(level_db.begin(), level_db.end()) - level_db.begin());
    if (top == 0 || top + 1 == level_db.size()) return static_cast<double>(top);
    const double a = level_db[top - 1], b = level_db[top], c = level_db[top + 1];
    const double denom = a - 2.0 * b + c;
    return static_cast<double>(top) + (denom < 0.0 ? 0.5 * (a - c) / denom : 0.0);
}

}  // namespace

double copy_heard_peak_hz(std::span<const partial> partials, double freq_hz, double ratio, double start_s, double end_s,
                          const heard_shift_params& params) {
    assert(freq_hz > 0.0 && ratio > 0.0 && params.step_s > 0.0 && params.grid_cents > 0.0 && end_s > start_s);
    const auto count = static_cast<std::size_t>(std::floor((end_s - start_s) / params.step_s));
    std::vector<std::complex<double>> z(count);
    for (const partial& q : partials)
        if (std::abs(q.freq_hz - freq_hz) <= params.near_share * freq_hz) add_baseband(q, freq_hz, ratio, start_s, params.step_s, z);
    const double centre_hz = ratio * freq_hz;
    const double grid_hz = centre_hz * (cents_to_ratio(params.grid_cents) - 1.0);
    const auto half = static_cast<int>(std::ceil(params.search_cents / params.grid_cents));
    std::vector<double> level_db(static_cast<std::size_t>(2 * half + 1));
    for (std::size_t i = 0; i < level_db.size(); ++i) {
        const double d_hz = (static_cast<double>(i) - half) * grid_hz;
        // exp(-i 2 pi d t) walked by one rotation a step from t = start_s.
        const std::complex<double> turn = std::polar(1.0, -2.0 * std::numbers::pi * d_hz * params.step_s);
        std::complex<double> rot = std::polar(1.0, -2.0 * std::numbers::pi * d_hz * start_s), acc{};
        for (const std::complex<double> v : z) acc += v * rot, rot *= turn;
        level_db[i] = 10.0 * std::log10(std::norm(acc) + 1e-300);
    }
    return centre_hz + (refined_top(level_db) - half) * grid_hz;
}

std::optional<double> recording_heard_peak_hz(const heard_span_spectrum& heard, double freq_hz,
                                              const heard_shift_params& params) {
    if (heard.mag.size() < 3 || !(heard.bin_hz > 0.0)) return std::nullopt;
    const double low_hz = freq_hz * cents_to_ratio(-params.search_cents);
    const double high_hz = freq_hz * cents_to_ratio(params.search_cents);
    const auto first = static_cast<std::size_t>(std::max(1.0, std::floor(low_hz / heard.bin_hz)));
    const auto last = std::min(heard.mag.size() - 2, static_cast<std::size_t>(std::ceil(high_hz / heard.bin_hz)));
    if (last < first + 2) return std::nullopt;
    std::vector<double> level_db;
    for (std::size_t k = first; k <= last; ++k) level_db.push_back(20.0 * std::log10(heard.mag[k] + 1e-300));
    const double top = refined_top(level_db);
    if (top <= 0.0 || top >= static_cast<double>(level_db.size() - 1)) return std::nullopt;
    return (static_cast<double>(first) + top) * heard.bin_hz;
}

}  // namespace wane

#include "synthesis/amplitude_runs.hpp"

#include <algorithm>
#include <array>
#include <cmath>

#include "core/units.hpp"
#include "synthesis/kernel_clones.hpp"

namespace wane {

void play_runs(std::span<const amplitude_run> runs) {
    std::size_t r = 0;
    for (; r + 4 <= runs.size(); r += 4) {
        const std::array<amplitude_run, 4> q{runs[r], runs[r + 1], runs[r + 2], runs[r + 3]};
        std::size_t common = q[0].count;
        for (const amplitude_run& x : q) common = std::min(common, x.count);
        double a0 = q[0].a, a1 = q[1].a, a2 = q[2].a, a3 = q[3].a;
        for (std::size_t n = 0; n < common; ++n) {
            q[0].dest[n] = static_cast<float>(a0);
            q[1].dest[n] = static_cast<float>(a1);
            q[2].dest[n] = static_cast<float>(a2);
            q[3].dest[n] = static_cast<float>(a3);
            a0 *= q[0].ratio;
            a1 *= q[1].ratio;
            a2 *= q[2].ratio;
            a3 *= q[3].ratio;
        }
        const std::array<double, 4> reached{a0, a1, a2, a3};
        for (std::size_t i = 0; i < 4; ++i) {
            double a = reached[i];
            for (std::size_t n = common; n < q[i].count; ++n) {
                q[i].dest[n] = static_cast<float>(a);
                a *= q[i].ratio;
            }
        }
    }
    for (; r < runs.size(); ++r) {
        double a = runs[r].a;
        for (std::size_t n = 0; n < runs[r].count; ++n) {
            runs[r].dest[n] = static_cast<float>(a);
            a *= runs[r].ratio;
        }
    }
}

namespace {

// dest[i] = peak_lin * t / attack_s at t = t0_s + (first + i) dt_s (the attack's ramp, sample by
// sample as its formula reads; no branch, so the loop runs in vectors; first + count < 2^31).
WANE_KERNEL_CLONES
void ramp_samples(float* __restrict dest, int first, int count, double t0_s, double dt_s, double peak_lin,
                  double attack_s) {
    for (int i = 0; i < count; ++i) {
        const double t = t0_s + static_cast<double>(first + i) * dt_s;
        dest[i] = static_cast<float>(peak_lin * t / attack_s);
    }
}

}  // namespace

void fill_amplitude(const envelope& env, std::span<const envelope_piece> pieces, double peak_lin, double t0_s,
                    double dt_s, std::span<float> dest, std::vector<amplitude_run>& runs) {
    // Time only grows with n: the samples before the onset (0), then the attack's, then the pieces'.
    const std::size_t onset = piece_stop(t0_s, dt_s, 0.0, 0, dest.size());
    std::fill(dest.begin(), dest.begin() + static_cast<std::ptrdiff_t>(onset), 0.0F);
    std::size_t n = piece_stop(t0_s, dt_s, env.attack_s, onset, dest.size());
    ramp_samples(dest.data() + onset, static_cast<int>(onset), static_cast<int>(n - onset), t0_s, dt_s, peak_lin, env.attack_s);
    while (n < dest.size()) {
        const double t = t0_s + static_cast<double>(n) * dt_s;
        const auto piece = std::find_if(pieces.begin(), pieces.end(), [&](const envelope_piece& p) { return t < p.end_s; });
        if (piece == pieces.end()) {  // unreachable for a valid envelope: the last piece ends at +inf
            dest[n++] = 0.0F;
            continue;
        }
        const double a = to_amp(level_db{piece->start_level.db + piece->slope_db_per_s * (t - piece->start_s)}).lin;
        const double ratio = to_amp(level_db{piece->slope_db_per_s * dt_s}).lin;
        const std::size_t stop = piece_stop(t0_s, dt_s, piece->end_s, n, dest.size());
        runs.push_back({.dest = dest.data() + n, .count = stop - n, .a = a, .ratio = ratio});
        n = stop;
    }
}

std::size_t piece_stop(double t0_s, double dt_s, double end_s, std::size_t from, std::size_t size) {
    auto before_end = [&](std::size_t n) { return t0_s + static_cast<double>(n) * dt_s < end_s; };
    const double estimate = std::ceil((end_s - t0_s) / dt_s);
    std::size_t stop = size;
    if (estimate < static_cast<double>(size)) stop = std::max(from, static_cast<std::size_t>(std::max(0.0, estimate)));
    while (stop > from && !before_end(stop - 1)) --stop;
    while (stop < size && before_end(stop)) ++stop;
    return stop;
}

}  // namespace wane

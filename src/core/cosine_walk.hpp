// cos(angle_num * j / angle_den) for j = 0, 1, 2, ... in turn: std::cos (and std::sin) at every
// exact_every-th j, between them the pair rotated on by one step of angle_num / angle_den (a few
// ulps off at most over exact_every steps): one cosine and sine per exact_every values instead of
// one per value. Used by the Hann window of the heard spectrum (angle 2 pi i / n) and the window's
// zero-phase transform (angle step * m), and the phasors an early companion is fitted against
// (analysis/early_companion: cos and sin of omega n); test_spectrum checks the cosines within 1e-12
// of a long-double direct sum.
#pragma once

#include <cmath>
#include <cstddef>

namespace wane {

class cosine_walk {
public:
    static constexpr std::size_t exact_every = 16;

    cosine_walk(double angle_num, double angle_den)
        : num_(angle_num), den_(angle_den), cos_step_(std::cos(angle_num / angle_den)),
          sin_step_(std::sin(angle_num / angle_den)) {}

    /// The cosine at the next j (j = 0 on the first call).
    double next() {
        if (j_ % exact_every == 0) {
            const double angle = num_ * static_cast<double>(j_) / den_;
            c_ = std::cos(angle);
            s_ = std::sin(angle);
        } else {
            const double next_c = c_ * cos_step_ - s_ * sin_step_;
            s_ = s_ * cos_step_ + c_ * sin_step_;
            c_ = next_c;
        }
        ++j_;
        return c_;
    }

    /// The sine at the j of the last next().
    [[nodiscard]] double sine() const { return s_; }

private:
    double num_, den_, cos_step_, sin_step_;
    double c_ = 1.0, s_ = 0.0;
    std::size_t j_ = 0;
};

}  // namespace wane

// cos(angle_num * j / angle_den) for j = 0, 1, 2, ... in turn: std::cos (and std::sin) at every
// exact_every-th j, between them the pair rotated on by one step of angle_num / angle_den (a few
// ulps off at most over exact_every steps): one cosine and sine per exact_every values instead of
// one per value. Used by the Hann window of the heard spectrum (angle 2 pi i / n) and the window's
// zero-phase transform (angle step * m); the phasors an early companion is fitted against
// (analysis/decaying_fit's phasor_table) walk cosine_walk_table's stretches with their anchors
// walked as well, exact every 256th; test_spectrum
// checks the cosines within 1e-12 of a long-double direct sum, and the table against the walk bit for bit.
#pragma once

#include <cassert>
#include <cmath>
#include <cstddef>
#include <span>

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
            rotate_on(c_, s_, cos_step_, sin_step_);
        }
        ++j_;
        return c_;
    }

    /// The pair (c, s) rotated on by one step (cos_step, sin_step): a double, or several side by
    /// side (a GCC/Clang vector of doubles), each lane the same products and sums.
    template <class T>
    static void rotate_on(T& c, T& s, double cos_step, double sin_step) {
        const T next_c = c * cos_step - s * sin_step;
        s = s * cos_step + c * sin_step;
        c = next_c;
    }

    /// The sine at the j of the last next().
    [[nodiscard]] double sine() const { return s_; }

private:
    double num_, den_, cos_step_, sin_step_;
    double c_ = 1.0, s_ = 0.0;
    std::size_t j_ = 0;
};

/// cos_out[j] and sin_out[j] for j in [0, cos_out.size()): cosine_walk(angle_num, angle_den)'s
/// next() and sine() in turn, bit for bit. Each exact_every-long stretch starts from its exact
/// value, so the stretches are independent: four of them are walked side by side (one vector of
/// four doubles), the rest one at a time.
inline void cosine_walk_table(double angle_num, double angle_den, std::span<double> cos_out, std::span<double> sin_out) {
    using lanes = double __attribute__((vector_size(32)));
    constexpr std::size_t stretch = cosine_walk::exact_every, width = 4 * stretch;
    assert(sin_out.size() == cos_out.size());
    const std::size_t count = cos_out.size();
    const double cos_step = std::cos(angle_num / angle_den), sin_step = std::sin(angle_num / angle_den);
    std::size_t from = 0;
    for (; from + width <= count; from += width) {
        lanes c, s;
        for (std::size_t l = 0; l < 4; ++l) {
            const double angle = angle_num * static_cast<double>(from + l * stretch) / angle_den;
            c[l] = std::cos(angle), s[l] = std::sin(angle);
        }
        for (std::size_t t = 0;; ++t) {
            for (std::size_t l = 0; l < 4; ++l) cos_out[from + l * stretch + t] = c[l], sin_out[from + l * stretch + t] = s[l];
            if (t + 1 == stretch) break;
            cosine_walk::rotate_on(c, s, cos_step, sin_step);
        }
    }
    double c = 1.0, s = 0.0;
    for (std::size_t j = from; j < count; ++j) {
        if (j % stretch == 0) {
            const double angle = angle_num * static_cast<double>(j) / angle_den;
            c = std::cos(angle), s = std::sin(angle);
        } else {
            cosine_walk::rotate_on(c, s, cos_step, sin_step);
        }
        cos_out[j] = c, sin_out[j] = s;
    }
}

}  // namespace wane

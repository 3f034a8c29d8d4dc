#include "synthesis/phasor_powers.hpp"

#include <bit>
#include <cmath>
#include <cstdint>
#include <memory>

#include "core/units.hpp"

namespace wane {

namespace {

/// Rows kept per thread and kind (a power of two: the slot is the top bits of a hash). On the
/// synthetic note about 1000 partials are planned over 331 plans, most of them seen before.
constexpr int kept_bits = 8;
constexpr std::size_t kept_rows = std::size_t{1} << kept_bits;

/// Rows by the bits of their argument, one per slot (a new row takes its slot's place).
template <class Row>
struct kept_table {
    std::array<std::uint64_t, kept_rows> key{};
    std::array<bool, kept_rows> filled{};
    std::array<Row, kept_rows> row{};
};

/// make(x), kept in table by x's bits (the same bits give the same row: make is a function of x).
template <class Row, class Make>
Row kept_row(std::unique_ptr<kept_table<Row>>& table, double x, Make make) {
    if (!table) table = std::make_unique<kept_table<Row>>();
    const auto bits = std::bit_cast<std::uint64_t>(x);
    // Fibonacci hashing: the top bits of the product depend on every bit of the key.
    const auto slot = static_cast<std::size_t>((bits * 0x9E3779B97F4A7C15ULL) >> (64 - kept_bits));
    if (!table->filled[slot] || table->key[slot] != bits) {
        table->row[slot] = make(x);
        table->key[slot] = bits;
        table->filled[slot] = true;
    }
    return table->row[slot];
}

lane_turns make_turns(double cycles_per_frame) {
    lane_turns u;
    for (std::size_t l = 0; l <= render_lanes; ++l) u[l] = std::polar(1.0, two_pi * cycles_per_frame * static_cast<double>(l));
    return u;
}

lane_decays make_decays(double ln_amp_per_frame) {
    lane_decays rho;
    for (std::size_t l = 0; l <= render_lanes; ++l) rho[l] = std::exp(ln_amp_per_frame * static_cast<double>(l));
    return rho;
}

}  // namespace

lane_turns lane_turns_of(double cycles_per_frame) {
    thread_local std::unique_ptr<kept_table<lane_turns>> kept;
    return kept_row(kept, cycles_per_frame, make_turns);
}

lane_decays lane_decays_of(double ln_amp_per_frame) {
    if (ln_amp_per_frame == 0.0) {  // e^0 = 1 (also for -0)
        lane_decays ones;
        ones.fill(1.0);
        return ones;
    }
    thread_local std::unique_ptr<kept_table<lane_decays>> kept;
    return kept_row(kept, ln_amp_per_frame, make_decays);
}

}  // namespace wane

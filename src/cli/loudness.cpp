#include "cli/loudness.hpp"

#include <cmath>
#include <cstdio>
#include <stdexcept>

#include "core/units.hpp"

namespace wane::cli {

double peak_abs(std::span<const float> samples) {
    double peak = 0.0;
    for (const float v : samples) {
        const double a = std::fabs(static_cast<double>(v));
        if (!(a <= peak)) peak = a;  // also takes NaN
        if (std::isnan(peak)) break;
    }
    return peak;
}

std::string dbfs_text(double amp) {
    char buf[64];
    std::snprintf(buf, sizeof buf, "%+.2f dBFS", to_level(amp_lin{amp}).db);
    return buf;
}

void refuse_too_loud(double peak, const std::string& what) {
    const double max_peak = to_amp(level_db{max_over_full_scale_db}).lin;
    if (peak <= max_peak) return;
    char rule[200];
    std::snprintf(rule, sizeof rule,
                  ", more than %.0f dB over full scale; check the patch's peak_db, gain_db and rising segments "
                  "(negative t60_s)",
                  max_over_full_scale_db);
    throw std::runtime_error(what + ": the render would peak at " +
                             (std::isfinite(peak) ? dbfs_text(peak) : std::string("a non-finite level")) + rule);
}

}  // namespace wane::cli

// Figures between two channels (see inter_channel.hpp).
#include "measure/inter_channel.hpp"

#include <algorithm>
#include <cmath>
#include <limits>

#include "core/octave_bands.hpp"
#include "measure/octave_filter.hpp"

namespace wane {

namespace {

double energy(std::span<const float> x) {
    double e = 0.0;
    for (const float v : x) e += static_cast<double>(v) * static_cast<double>(v);
    return e;
}

}  // namespace

inter_channel_figures inter_channel(std::span<const float> left, std::span<const float> right, double sample_rate_hz,
                                    std::size_t onset, const inter_channel_params& params) {
    const std::size_t total = std::min(left.size(), right.size());
    const std::size_t first = std::min(onset, total);
    const std::size_t n = std::min(total - first, static_cast<std::size_t>(std::llround(params.span_s * sample_rate_hz)));
    const std::span<const float> l = left.subspan(first, n);
    const std::span<const float> r = right.subspan(first, n);
    inter_channel_figures out;
    double lr = 0.0;
    for (std::size_t i = 0; i < n; ++i) lr += static_cast<double>(l[i]) * static_cast<double>(r[i]);
    const double el = energy(l), er = energy(r);
    out.correlation = el > 0.0 && er > 0.0 ? lr / std::sqrt(el * er) : std::numeric_limits<double>::quiet_NaN();
    for (const octave_band& band :
         octave_bands_within(sample_rate_hz, params.lowest_band_nominal_hz, params.highest_band_nominal_hz)) {
        const octave_filter filter(band, sample_rate_hz);
        const double bl = energy(filter.apply(l));
        const double br = energy(filter.apply(r));
        out.band_nominal_hz.push_back(band.nominal_hz);
        out.level_difference_db.push_back(bl > 0.0 && br > 0.0 ? 10.0 * std::log10(br / bl)
                                          : br > 0.0           ? std::numeric_limits<double>::infinity()
                                                               : -std::numeric_limits<double>::infinity());
    }
    return out;
}

}  // namespace wane

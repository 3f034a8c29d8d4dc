// `compare` of two stereo files (see compare_stereo.hpp).
#include "cli/compare_stereo.hpp"

#include <algorithm>
#include <cmath>
#include <sstream>

#include "core/text_format.hpp"

namespace wane::cli {

namespace {

std::string num_or_null(double v, const char* fmt) { return std::isfinite(v) ? printf_text(fmt, v) : "null"; }

}  // namespace

stereo_compare compare_stereo(const mono_audio& a, const mono_audio& b, const compare_result& mix,
                              const compare_params& params) {
    return compare_channels(a.channels[0], a.channels[1], b.channels[0], b.channels[1], a.sample_rate_hz, mix, params);
}

std::string stereo_table(const stereo_compare& s) {
    std::ostringstream o;
    o << "\n  per channel                     left      right\n";
    o << printf_text("  log-spectral distance, dB  %9.2f  %9.2f\n", s.left.whole.log_spectral_distance_db,
                     s.right.whole.log_spectral_distance_db);
    o << printf_text("  spectral convergence       %9.3f  %9.3f\n", s.left.whole.spectral_convergence,
                     s.right.whole.spectral_convergence);
    o << printf_text("  early SNR, dB              %9.2f  %9.2f\n", s.left.early_snr_db, s.right.early_snr_db);
    o << "\n  between the channels, first 1 s   A          B          B - A\n";
    for (std::size_t i = 0; i < s.a.band_nominal_hz.size() && i < s.b.band_nominal_hz.size(); ++i) {
        const double da = s.a.level_difference_db[i], db = s.b.level_difference_db[i];
        o << printf_text("  R-L level %6.0f Hz, dB  %9.2f  %9.2f  %9.2f\n", s.a.band_nominal_hz[i], da, db, db - da);
    }
    o << printf_text("  correlation               %9.3f  %9.3f  %9.3f\n", s.a.correlation, s.b.correlation,
                     s.b.correlation - s.a.correlation);
    return o.str();
}

std::string stereo_json(const stereo_compare& s) {
    std::ostringstream o;
    o << "{\"left\": {\"log_spectral_distance_db\": " << num_or_null(s.left.whole.log_spectral_distance_db, "%.6g")
      << ", \"spectral_convergence\": " << num_or_null(s.left.whole.spectral_convergence, "%.6g")
      << ", \"early_snr_db\": " << num_or_null(s.left.early_snr_db, "%.6g") << "}, ";
    o << "\"right\": {\"log_spectral_distance_db\": " << num_or_null(s.right.whole.log_spectral_distance_db, "%.6g")
      << ", \"spectral_convergence\": " << num_or_null(s.right.whole.spectral_convergence, "%.6g")
      << ", \"early_snr_db\": " << num_or_null(s.right.early_snr_db, "%.6g") << "}, ";
    o << "\"level_difference_db\": [";
    for (std::size_t i = 0; i < s.a.band_nominal_hz.size() && i < s.b.band_nominal_hz.size(); ++i) {
        o << (i ? ", " : "") << "{\"nominal_hz\": " << num_or_null(s.a.band_nominal_hz[i], "%.6g")
          << ", \"a\": " << num_or_null(s.a.level_difference_db[i], "%.6g")
          << ", \"b\": " << num_or_null(s.b.level_difference_db[i], "%.6g") << "}";
    }
    o << "], \"correlation\": {\"a\": " << num_or_null(s.a.correlation, "%.6g")
      << ", \"b\": " << num_or_null(s.b.correlation, "%.6g") << "}}";
    return o.str();
}

}  // namespace wane::cli

// The whole analysis: a mono recording -> a patch. Owned by the Analysis II work.
#pragma once

#include <span>
#include <string>

#include "analysis/noise_model.hpp"
#include "core/analysis_error.hpp"
#include "core/patch.hpp"
#include "fitting/envelope_fit.hpp"
#include "tracking/tracker.hpp"

namespace wane {

struct analysis_params {
    tracking_params tracking;
    int max_segments = 3;
    double start_s = 0.0;     ///< analyze from here (seconds into the file)
    double end_s = 0.0;       ///< 0 = to the end
    std::string source_file;  ///< recorded in [source].file
    std::string note_name;    ///< [note].name
    bool noise_model = true;  ///< fit [[noise]] bands to the residual (analysis/noise_model.hpp)
    noise_model_params noise{};
};

struct analysis_summary {
    int partials = 0;
    int segments = 0;          ///< total decay segments over all partials
    double fit_error_db = 0.0; ///< RMS error of the envelope fits over all fitted frames, dB
    int tracks = 0;            ///< tracks the tracker returned
    int unfitted = 0;          ///< tracks dropped: fewer than two frames clear of the floor
};

struct analysis_result {
    patch value;
    tracking_result tracking;
    analysis_summary summary;
};

/// Largest number of decay segments per partial the analysis fits (--max-segments): an analysis
/// setting, well inside the format's limit patch_rules::max_decay_segments.
inline constexpr int max_fit_decay_segments = max_fit_segments;

/// Throws analysis_error with a user-facing reason when the sound cannot be analyzed.
analysis_result analyze_note(std::span<const float> samples, double sample_rate_hz,
                             const analysis_params& params);

}  // namespace wane

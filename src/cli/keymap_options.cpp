#include "cli/keymap_options.hpp"

#include <algorithm>
#include <cmath>
#include <thread>

#include "cli/common.hpp"
#include "core/text_format.hpp"
#include "synthesis/render.hpp"

namespace wane::cli {

namespace {
/// How far the softest layer may lie below the loudest, and how much darker it may be (our
/// choice, no source: 96 dB is a 16-bit file's range; 48 dB per octave matches --brightness-db-oct).
constexpr double max_layer_span_db = 96.0;
constexpr double max_layer_tilt_span_db_per_oct = 48.0;

void check_layer_options(const keymap_options& o) {
    if (o.every < 1) throw usage_error("--every: must be at least 1");
    if (o.layers < 1 || o.layers > max_keymap_layers) throw usage_error("--layers: must be between 1 and 127");
    if (o.variants < 1 || o.variants > max_keymap_variants) throw usage_error("--variants: must be between 1 and 64");
    const double steps = o.layers - 1;
    if (!(o.layer_step_db >= 0.0 && o.layer_step_db * steps <= max_layer_span_db)) {
        throw usage_error("--layer-step-db " + short_num(o.layer_step_db) +
                          ": must be 0 or more, and the softest layer at most " + short_num(max_layer_span_db) +
                          " dB below the loudest (--layers " + std::to_string(o.layers) + ")");
    }
    if (!(std::fabs(o.layer_brightness_step) * steps <= max_layer_tilt_span_db_per_oct)) {
        throw usage_error("--layer-tilt-db-oct " + short_num(o.layer_brightness_step) +
                          ": the softest layer may differ from the loudest by at most " +
                          short_num(max_layer_tilt_span_db_per_oct) + " dB per octave (--layers " +
                          std::to_string(o.layers) + ")");
    }
}
}  // namespace

keymap_settings check_keymap_options(const keymap_options& o) {
    keymap_settings k;
    if (o.transforms.transpose_semitones || !o.transforms.to_note.empty()) {
        throw usage_error(std::string(o.transforms.transpose_semitones ? "--transpose" : "--to-note") +
                          ": not available with keymap, which moves the patch to each note of --notes");
    }
    k.base = to_params(o.transforms);
    if (o.notes) {
        try {
            k.range = parse_note_range(*o.notes);
        } catch (const transform_error& e) {
            throw usage_error(std::string("--notes: ") + e.what());
        }
    }
    if (o.between != "nearest" && o.between != "interpolated") {
        throw usage_error("--between: must be nearest or interpolated, not '" + o.between + "'");
    }
    k.mode = o.between == "nearest" ? between_roots::nearest : between_roots::interpolated;
    check_layer_options(o);
    if (!(o.rate_hz >= min_render_rate_hz && o.rate_hz <= max_render_rate_hz) || o.rate_hz != std::round(o.rate_hz)) {
        throw usage_error("--rate " + short_num(o.rate_hz) + ": must be a whole number of Hz from 8000 to 192000");
    }
    const auto format = parse_sample_format(o.bits);
    if (!format) throw usage_error("--bits: must be 16, 24 or 32f, not '" + o.bits + "'");
    k.format = *format;
    if (o.threads < 0) throw usage_error("--threads: must be 0 (all cores) or more");
    check_length_options(o.length);
    if (!(o.max_work > 0.0 && std::isfinite(o.max_work))) throw usage_error("--max-work " + short_num(o.max_work) + ": must be positive");
    if (!(o.max_set_work > 0.0 && std::isfinite(o.max_set_work))) {
        throw usage_error("--max-set-work " + short_num(o.max_set_work) + ": must be positive");
    }
    if (o.max_files < 1) throw usage_error("--max-files " + std::to_string(o.max_files) + ": must be at least 1");
    k.threads = o.threads > 0 ? o.threads : static_cast<int>(std::max(1u, std::thread::hardware_concurrency()));
    return k;
}

}  // namespace wane::cli

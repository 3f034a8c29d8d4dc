#include "transform/keymap_sfz.hpp"

#include <cassert>
#include <cmath>
#include <limits>
#include <sstream>

#include "core/text_format.hpp"

namespace wane {

double sfz_velocity_gain_db(int velocity, int pct) {
    assert(velocity >= 1 && velocity <= midi_velocity_max && pct >= 0 && pct <= 100);
    const double t = pct / 100.0;
    const double v = static_cast<double>(velocity) / midi_velocity_max;
    return 20.0 * std::log10(1.0 - t + t * v * v);
}

int fit_amp_veltrack_pct(std::span<const layer_level> layers) {
    if (layers.size() <= 1) return sfz_default_amp_veltrack_pct;
    int best = sfz_default_amp_veltrack_pct;
    double best_error = std::numeric_limits<double>::infinity();
    for (int pct = 0; pct <= 100; ++pct) {
        double error = 0.0;
        for (const layer_level& l : layers) {
            const int middle = (l.lovel + l.hivel) / 2;
            const double miss = l.level_db + sfz_velocity_gain_db(middle, pct) -
                                sfz_velocity_gain_db(middle, sfz_default_amp_veltrack_pct);
            error += miss * miss;
        }
        if (error < best_error) {
            best_error = error;
            best = pct;
        }
    }
    return best;
}

std::string keymap_sfz(const std::vector<keymap_job>& jobs, const keymap_params& params, std::string_view title,
                       const sfz_playback& playback) {
    assert(playback.release_s >= 0.0 && playback.release_s <= sfz_max_release_s);
    std::string clean_title(title);
    for (char& c : clean_title) {
        if (c == '\n' || c == '\r') c = ' ';
    }
    std::ostringstream s;
    s << "// " << clean_title << "\n";
    s << "// wane keymap: " << note_name(params.notes.low_midi) << ".." << note_name(params.notes.high_midi)
      << ", every " << params.every << " note(s), " << params.layers << " velocity layer(s), " << params.variants
      << " round-robin variant(s)\n";
    s << "\n<global> loop_mode=one_shot ampeg_release=" << printf_text("%.3f", playback.release_s)
      << " amp_veltrack=" << playback.amp_veltrack_pct << "\n";
    int current_variant = 0;
    for (const keymap_job& j : jobs) {
        if (j.variant != current_variant) {
            current_variant = j.variant;
            s << "\n<group>";
            if (params.variants > 1) s << " seq_length=" << params.variants << " seq_position=" << j.variant;
            s << "\n";
        }
        s << "<region> sample=" << j.sample << " lokey=" << j.lokey << " hikey=" << j.hikey
          << " pitch_keycenter=" << j.root_midi << " lovel=" << j.lovel << " hivel=" << j.hivel << "\n";
    }
    return s.str();
}

}  // namespace wane

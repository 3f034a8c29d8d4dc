#include "cli/length_options.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <stdexcept>

#include "cli/common.hpp"
#include "synthesis/render.hpp"
#include "synthesis/render_length.hpp"

namespace wane::cli {

namespace {

std::string number_text(const char* fmt, double v) {
    char buf[64];
    std::snprintf(buf, sizeof buf, fmt, v);
    return buf;
}

}  // namespace

void add_length_options(CLI::App* sub, length_cli& o) {
    sub->add_option("--length-s", o.length_s,
                    "Render length in seconds, at most 600 (default: the patch's note.length_s); past the "
                    "patch's length every decay runs on");
    sub->add_option("--until-db", o.until_db,
                    "Render until every partial and noise band has fallen this many dB below the note's "
                    "loudest peak, -200 to below 0, e.g. -90 (default: the patch's note.length_s)");
}

void check_length_options(const length_cli& o) {
    if (o.length_s && o.until_db) throw usage_error("--length-s and --until-db: give one or the other");
    if (o.length_s && !(*o.length_s > 0.0 && *o.length_s <= max_length_s)) {
        throw usage_error("--length-s " + number_text("%.6g", *o.length_s) + ": must be more than 0 and at most " +
                                 number_text("%.0f", max_length_s) + " s");
    }
    if (o.until_db && !(*o.until_db >= min_until_db && *o.until_db < 0.0)) {
        throw usage_error("--until-db " + number_text("%.6g", *o.until_db) + ": must be from " +
                                 number_text("%.0f", min_until_db) + " to below 0 dB");
    }
}

double chosen_length_s(const patch& p, const length_cli& o, const std::string& patch_name) {
    if (o.length_s) return *o.length_s;
    if (!o.until_db) return 0.0;
    const sound_length s = sound_length_s(p, *o.until_db);
    const std::string level = number_text("%g", *o.until_db) + " dB";
    if (!s.length_s) {
        throw std::runtime_error(patch_name + ": " + s.holding + " holds its level above " + level +
                                 " under the peak (last t60_s = inf or rising); give --length-s instead of --until-db");
    }
    if (*s.length_s > max_length_s) {
        throw std::runtime_error(patch_name + ": the sound falls " + level + " under its peak only after " +
                                 number_text("%.1f", *s.length_s) + " s, past the " +
                                 number_text("%.0f", max_length_s) + " s limit; give --length-s");
    }
    // The render ends with the end fade: it starts once the sound has fallen that far.
    return std::min(max_length_s, *s.length_s + end_fade_s);
}

}  // namespace wane::cli

#include "transform/keymap_roots.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <sstream>

#include "core/text_format.hpp"
#include "transform/key_blend.hpp"
#include "transform/transform.hpp"

namespace wane {

namespace {

layer_recipe layer_of(const recorded_root& r, int layer, int layers, between_roots mode) {
    const auto count = r.layers.size();
    assert(count >= 1 && layer >= 1 && layer <= layers);
    if (count == 1) return {.soft = r.layers[0], .loud = r.layers[0], .weight_loud = 0.0, .single = true};
    const double u = layers == 1 ? static_cast<double>(count - 1)
                                 : static_cast<double>(layer - 1) * static_cast<double>(count - 1) / (layers - 1);
    auto lo = static_cast<std::size_t>(std::floor(u));
    lo = std::min(lo, count - 1);
    const std::size_t hi = std::min(lo + 1, count - 1);
    double w = u - static_cast<double>(lo);
    if (mode == between_roots::nearest) {
        if (w > 0.5) lo = hi;
        w = 0.0;
    }
    if (w == 0.0) return {.soft = r.layers[lo], .loud = r.layers[lo], .weight_loud = 0.0, .single = false};
    return {.soft = r.layers[lo], .loud = r.layers[hi], .weight_loud = w, .single = false};
}

/// One root's layer patch: the recording(s), with the layer steps for a single recording.
patch layer_patch(std::span<const patch> patches, const layer_recipe& r, const keymap_job& job) {
    patch p = r.weight_loud > 0.0
                  ? interpolate_patches(patches[r.soft], patches[r.loud], r.weight_loud, root_hz(patches[r.loud].note))
                  : patches[r.loud];
    if (r.single && (job.layer_gain_db != 0.0 || job.layer_brightness_db_per_oct != 0.0)) {
        p = apply_transforms(p, {.brightness_db_per_oct = job.layer_brightness_db_per_oct, .gain_db = job.layer_gain_db},
                             0.0);
    }
    return p;
}

std::string layer_text(const layer_recipe& r, std::span<const std::string> names) {
    if (r.weight_loud == 0.0) return names[r.loud];
    std::string text = printf_text("(%.3f ", 1.0 - r.weight_loud);
    text.append(names[r.soft]).append(printf_text(" + %.3f ", r.weight_loud)).append(names[r.loud]).append(")");
    return text;
}

}  // namespace

int patch_key_midi(const patch& p) { return static_cast<int>(std::lround(hz_to_midi(root_hz(p.note), p.note.root.a4_hz))); }

double patch_level_db(const patch& p) {
    double top = -infinity;
    for (const partial& q : p.partials) top = std::max(top, q.env.peak.db);
    for (const noise_band& n : p.noise) top = std::max(top, n.env.peak.db);
    return top + p.note.gain_db;
}

std::vector<recorded_root> group_roots(std::span<const patch> patches) {
    std::vector<std::size_t> order(patches.size());
    for (std::size_t i = 0; i < order.size(); ++i) order[i] = i;
    std::stable_sort(order.begin(), order.end(), [&](std::size_t x, std::size_t y) {
        const int kx = patch_key_midi(patches[x]);
        const int ky = patch_key_midi(patches[y]);
        if (kx != ky) return kx < ky;
        return patch_level_db(patches[x]) < patch_level_db(patches[y]);
    });
    std::vector<recorded_root> roots;
    for (const std::size_t i : order) {
        const int key = patch_key_midi(patches[i]);
        if (roots.empty() || roots.back().key_midi != key) roots.push_back({.key_midi = key, .layers = {}});
        roots.back().layers.push_back(i);
    }
    return roots;
}

job_recipe recipe_for(std::span<const recorded_root> roots, int key, int layer, int layers, between_roots mode) {
    assert(!roots.empty());
    std::size_t lo = 0;
    while (lo + 1 < roots.size() && roots[lo + 1].key_midi <= key) ++lo;
    std::size_t hi = lo;
    double w = 0.0;
    if (key > roots[lo].key_midi && lo + 1 < roots.size()) {
        hi = lo + 1;
        w = static_cast<double>(key - roots[lo].key_midi) / (roots[hi].key_midi - roots[lo].key_midi);
        if (mode == between_roots::nearest) {
            if (w > 0.5) lo = hi;
            hi = lo;
            w = 0.0;
        }
    }
    return {.lower_key = roots[lo].key_midi,
            .upper_key = roots[hi].key_midi,
            .lower = layer_of(roots[lo], layer, layers, mode),
            .upper = layer_of(roots[hi], layer, layers, mode),
            .weight_upper = w};
}

patch recipe_patch(std::span<const patch> patches, const job_recipe& recipe, const keymap_job& job, double a4_hz) {
    patch lower = layer_patch(patches, recipe.lower, job);
    if (recipe.weight_upper == 0.0) return lower;
    const patch upper = layer_patch(patches, recipe.upper, job);
    return interpolate_patches(lower, upper, recipe.weight_upper, midi_to_hz(job.root_midi, a4_hz));
}

std::string keymap_plan_text(const std::vector<keymap_job>& jobs, const std::vector<job_recipe>& recipes,
                             std::span<const std::string> names, between_roots mode) {
    assert(jobs.size() == recipes.size());
    std::ostringstream s;
    s << "# wane keymap plan: keys between recorded roots "
      << (mode == between_roots::nearest ? "from the nearest root" : "interpolated between the two nearest roots")
      << "\n# sample  key  layer  keys  velocities  <- recordings (weights)\n";
    for (std::size_t i = 0; i < jobs.size(); ++i) {
        const keymap_job& j = jobs[i];
        if (j.variant != 1) continue;
        const job_recipe& r = recipes[i];
        s << j.sample << "  " << note_name(j.root_midi) << "  v" << j.layer << "  " << note_name(j.lokey) << ".."
          << note_name(j.hikey) << "  " << j.lovel << ".." << j.hivel << "  <- ";
        if (r.weight_upper == 0.0) {
            s << layer_text(r.lower, names) << " at " << note_name(r.lower_key);
        } else {
            s << printf_text("%.3f", 1.0 - r.weight_upper) << " x " << layer_text(r.lower, names) << " at "
              << note_name(r.lower_key) << " + " << printf_text("%.3f", r.weight_upper) << " x "
              << layer_text(r.upper, names) << " at " << note_name(r.upper_key);
        }
        if (r.lower.single && j.layer_gain_db != 0.0) {
            s << "  (layer steps " << printf_text("%.1f", j.layer_gain_db) << " dB, "
              << printf_text("%.1f", j.layer_brightness_db_per_oct) << " dB/oct)";
        }
        s << "\n";
    }
    return s.str();
}

}  // namespace wane

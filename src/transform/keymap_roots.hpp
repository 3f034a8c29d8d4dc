// A set from several recorded notes: each patch is a root at its own key; several at one key are
// velocity layers ordered by level. Every job (key, layer) gets a recipe saying which recordings
// make it and with what weights, and the patch is made from the recipe (transform/key_blend.hpp).
//
// Keys: a key at or below the lowest root uses the lowest root, at or above the highest the
// highest; between two roots k_lo < key < k_hi:
//   nearest       the nearer root (a key exactly between goes to the lower one), moved to the key;
//   interpolated  the two roots' patches interpolated with weight w = (key - k_lo) / (k_hi - k_lo)
//                 of the upper root.
// Layers: layer j of L (1 = softest) at a root with R recordings (softest first):
//   R = 1   the recording, j below the top made softer and darker by the layer steps (keymap.hpp);
//   R > 1   position u = (j - 1) (R - 1) / (L - 1) among the recordings (L = 1: the loudest), the
//           recordings floor(u) and ceil(u) interpolated with weight u - floor(u) of the louder
//           (with nearest, the nearer recording).
#pragma once

#include <span>
#include <string>
#include <vector>

#include "core/patch.hpp"
#include "transform/keymap.hpp"

namespace wane {

enum class between_roots { nearest, interpolated };

/// The recordings of one key, softest first (indices into the set's patches).
struct recorded_root {
    int key_midi = 0;
    std::vector<std::size_t> layers;
};

/// The key of a pitched patch: its root's frequency rounded to the nearest MIDI note.
int patch_key_midi(const patch& p);
/// A patch's level for ordering layers: its loudest partial or band peak_db plus gain_db.
double patch_level_db(const patch& p);

/// Groups patches by key (ascending); at one key by level, softest first (ties: input order).
std::vector<recorded_root> group_roots(std::span<const patch> patches);

/// Which recordings make one layer at one root.
struct layer_recipe {
    std::size_t soft = 0;  ///< patch index
    std::size_t loud = 0;  ///< patch index (= soft for one recording)
    double weight_loud = 0.0;
    bool single = true;  ///< one recording: the layer steps apply
};

/// Which roots make one job.
struct job_recipe {
    int lower_key = 0;
    int upper_key = 0;
    layer_recipe lower;
    layer_recipe upper;
    double weight_upper = 0.0;  ///< 0: the lower root alone
};

job_recipe recipe_for(std::span<const recorded_root> roots, int key, int layer, int layers, between_roots mode);

/// The patch of a job (not yet moved to its key, its variation not yet applied): each root's
/// layer (with the layer steps of job for a single recording), and between roots the
/// interpolation at the key's frequency (midi_to_hz(job.root_midi, a4_hz)).
patch recipe_patch(std::span<const patch> patches, const job_recipe& recipe, const keymap_job& job, double a4_hz);

/// The plan as text: one line per rendered key and layer (first variant) naming the recordings
/// and their weights; names are the patches' file names.
std::string keymap_plan_text(const std::vector<keymap_job>& jobs, const std::vector<job_recipe>& recipes,
                             std::span<const std::string> names, between_roots mode);

}  // namespace wane

// The SFZ text of a multisample set, and the playback opcodes chosen for it.
//
// The file (opcodes as the SFZ format's open specification documents them, sfzformat.com):
//   <global> loop_mode=one_shot ampeg_release=R amp_veltrack=P
//   <group> [seq_length=V seq_position=r]       one group per round-robin variant
//   <region> sample=NAME lokey= hikey= pitch_keycenter= lovel= hivel=
// loop_mode=one_shot: a plucked or struck note plays its whole sample and a note-off does not cut
// it (the note decays as recorded; without it a sampler loops or stops the sample at note-off).
// ampeg_release: the release a player applies if it does not honour one_shot: the longest sample,
// so the note still rings out (at most sfz_max_release_s, the format's range).
// amp_veltrack: fitted to the rendered layers (fit_amp_veltrack_pct). Sample paths are the bare
// file names: relative to the SFZ file, which sits beside its samples.
#pragma once

#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "transform/keymap.hpp"

namespace wane {

/// The format's range of ampeg_release, seconds (SFZ specification: 0 to 100 s).
inline constexpr double sfz_max_release_s = 100.0;
/// The format's default velocity tracking (SFZ specification: amp_veltrack=100).
inline constexpr int sfz_default_amp_veltrack_pct = 100;

struct sfz_playback {
    double release_s = 1.0;  ///< ampeg_release, 0..sfz_max_release_s
    int amp_veltrack_pct = sfz_default_amp_veltrack_pct;
};

/// One velocity layer of a rendered set: its velocity range and its measured level in dB relative
/// to the loudest layer (<= 0).
struct layer_level {
    int lovel = 1;
    int hivel = midi_velocity_max;
    double level_db = 0.0;
};

/// Gain of the sampler's velocity tracking at velocity v (1..127) for amp_veltrack = pct (0..100),
/// in dB. SFZ specification: at 100 the amplitude is (v/127)^2; between 0 and 100 the amplitude
/// is 1 - t + t (v/127)^2 with t = pct / 100 (the usual players' blend, from memory).
double sfz_velocity_gain_db(int velocity, int pct);

/// amp_veltrack (0..100) for a set whose layers already differ in level: the sampler's level at
/// each layer's middle velocity, layer level + tracking gain, best matches (least squares in dB)
/// the level one sample would have there at the format's default tracking of 100. One layer: 100.
int fit_amp_veltrack_pct(std::span<const layer_level> layers);

/// The SFZ mapping of the jobs: a comment header, the <global> playback opcodes, then one <group>
/// per variant (with seq_length and seq_position when there are several) holding one <region> per
/// job. title is put in a comment (line breaks replaced by spaces).
std::string keymap_sfz(const std::vector<keymap_job>& jobs, const keymap_params& params, std::string_view title,
                       const sfz_playback& playback = {});

}  // namespace wane

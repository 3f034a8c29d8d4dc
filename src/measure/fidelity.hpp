// The headline of a comparison, and the definition of every figure `compare` and the report show:
// one home for the wording, so the command's help, its output and the page say the same.
#pragma once

#include <string>
#include <utility>
#include <vector>

#include "measure/compare.hpp"

namespace wane {

/// "fidelity: log-spectral distance 5.92 dB (whole note), onset SNR 9.24 dB (first 100 ms)".
/// The first figure is the headline: the mean over STFT sizes of the RMS dB difference of the
/// two spectra (spectral_distance.hpp); the onset SNR says how close the first 100 ms are in
/// waveform, where the copy's phases matter.
std::string fidelity_headline(const compare_result& r);

/// (figure name, definition) for every figure, in the order compare prints them.
std::vector<std::pair<std::string, std::string>> figure_definitions();

}  // namespace wane

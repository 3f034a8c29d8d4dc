// The report's sections, one writer each, in the files named beside them (report.cpp puts them
// in page order).
#pragma once

#include <sstream>
#include <string>

#include "report/report.hpp"

namespace wane::report_sections {

/// Source, copy and difference spectrograms with the linear/log switch (spectrogram_section.cpp).
void write_spectrograms(std::ostringstream& h, const report_inputs& in);
/// Waveforms and short-window spectra of the first 100 ms (onset_view.cpp).
void write_onset(std::ostringstream& h, const report_inputs& in);
/// Every partial's measured level and fitted envelope, grouped (envelope_plots.cpp).
void write_envelopes(std::ostringstream& h, const report_inputs& in);
/// Every noise band's measured level and fitted envelope (envelope_plots.cpp).
void write_noise(std::ostringstream& h, const report_inputs& in);
/// Each channel against the same channel, and the figures between the channels, for a stereo
/// source and copy (report_inputs::stereo; nothing when it is null) (stereo_section.cpp).
void write_stereo(std::ostringstream& h, const report_inputs& in);
/// The players and the script that renders one partial on demand (players.cpp).
void write_listen(std::ostringstream& h, const report_inputs& in);

/// "1.23 s" below 10 s, "12.3 s" above.
std::string seconds_text(double s);

}  // namespace wane::report_sections

// MIDI note numbers, scientific pitch names and equal-tempered frequencies.
// Equal temperament: f = a4_hz * 2^((midi - 69) / 12); A4 = MIDI 69 = 440 Hz (ISO 16).
// Scientific pitch notation: C4 = MIDI 60 (middle C), octave number changes at C.
#pragma once

#include <optional>
#include <string>
#include <string_view>

namespace wane {

inline constexpr double default_a4_hz = 440.0;
inline constexpr int a4_midi = 69;

double midi_to_hz(double midi, double a4_hz = default_a4_hz);
double hz_to_midi(double freq_hz, double a4_hz = default_a4_hz);
/// "C4", "F#3", "Bb2", "c#-1"; sharps '#' and flats 'b'. Empty when the text is not a note name
/// or the note lies outside MIDI 0..127.
std::optional<int> parse_note_name(std::string_view text);
/// A note given as a name ("C4") or a MIDI number ("60").
std::optional<int> parse_note(std::string_view text);
/// Name with sharps, e.g. 61 -> "C#4".
std::string note_name(int midi);

}  // namespace wane

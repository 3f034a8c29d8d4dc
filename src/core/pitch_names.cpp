#include "core/pitch_names.hpp"

#include <array>
#include <cctype>
#include <charconv>
#include <cmath>

namespace wane {

namespace {
constexpr int semitones_per_octave = 12;
constexpr int midi_octave_offset = 1;  // MIDI 0 is C-1
constexpr std::array<const char*, 12> sharp_names{"C", "C#", "D", "D#", "E", "F",
                                                  "F#", "G", "G#", "A", "A#", "B"};
}  // namespace

double midi_to_hz(double midi, double a4_hz) {
    return a4_hz * std::exp2((midi - a4_midi) / semitones_per_octave);
}

double hz_to_midi(double freq_hz, double a4_hz) {
    return a4_midi + semitones_per_octave * std::log2(freq_hz / a4_hz);
}

std::optional<int> parse_note_name(std::string_view text) {
    if (text.empty()) return std::nullopt;
    static constexpr std::array<int, 7> letter_pc{9, 11, 0, 2, 4, 5, 7};  // A B C D E F G
    const char letter = static_cast<char>(std::toupper(static_cast<unsigned char>(text[0])));
    if (letter < 'A' || letter > 'G') return std::nullopt;
    int pc = letter_pc[static_cast<std::size_t>(letter - 'A')];
    std::size_t i = 1;
    while (i < text.size() && (text[i] == '#' || text[i] == 'b')) {
        pc += text[i] == '#' ? 1 : -1;
        ++i;
    }
    int octave = 0;
    const char* first = text.data() + i;
    const char* last = text.data() + text.size();
    if (first == last) return std::nullopt;
    auto [ptr, ec] = std::from_chars(first, last, octave);
    if (ec != std::errc{} || ptr != last) return std::nullopt;
    const int midi = (octave + midi_octave_offset) * semitones_per_octave + pc;
    if (midi < 0 || midi > 127) return std::nullopt;
    return midi;
}

std::optional<int> parse_note(std::string_view text) {
    int midi = 0;
    auto [ptr, ec] = std::from_chars(text.data(), text.data() + text.size(), midi);
    if (ec == std::errc{} && ptr == text.data() + text.size() && !text.empty()) {
        if (midi < 0 || midi > 127) return std::nullopt;
        return midi;
    }
    return parse_note_name(text);
}

std::string note_name(int midi) {
    const int pc = ((midi % semitones_per_octave) + semitones_per_octave) % semitones_per_octave;
    const int octave = (midi - pc) / semitones_per_octave - midi_octave_offset;
    return std::string(sharp_names[static_cast<std::size_t>(pc)]) + std::to_string(octave);
}

}  // namespace wane

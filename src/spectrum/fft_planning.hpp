// How the FFTW plans are made, shared by the STFT (spectrum/stft.cpp) and the build-time program
// that stores their wisdom (tools/fft_wisdom/make_fft_wisdom.cpp): the planner flags, the range of
// sizes whose wisdom is stored, and the stored table (made at build time, compiled into the core).
#pragma once

#include <fftw3.h>

#include <span>

namespace wane {

/// FFTW_ESTIMATE (no timing: the same plan every run) without the buffered solvers. The estimate
/// planner weighs buffered variants of every sub-problem and, at every even 2-3-5 size from 16 to
/// 400000, picks an unbuffered plan anyway (fftwf_sprint_plan identical with and without the flag):
/// the same plan, about 12% less planning (measured over those 359 sizes: 1618 -> 1421 ms).
/// test_spectrum checks the bins bit-equal to a plain FFTW_ESTIMATE plan.
inline constexpr unsigned fft_planner_flags = FFTW_ESTIMATE | FFTW_NO_BUFFERING;

/// The sizes whose wisdom is stored: every even size with no prime factor over 5 (what
/// fast_fft_size gives) up to these, forward (real to complex) and inverse (complex to real).
inline constexpr int stored_forward_max_size = 1 << 20;
inline constexpr int stored_inverse_max_size = 1 << 16;

/// One size's FFTW wisdom as fftwf_export_wisdom_to_string wrote it after planning that size
/// alone with fft_planner_flags (the planner's choices for the size and its sub-problems).
struct stored_fft_wisdom {
    int size = 0;
    bool inverse = false;
    const char* text = nullptr;
};

/// The stored wisdom, ordered by (inverse, size): made by make_fft_wisdom at build time on the
/// building machine. Empty when FFTW was not asked at build time.
std::span<const stored_fft_wisdom> stored_fft_wisdom_table();

}  // namespace wane

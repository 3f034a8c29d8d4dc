// Physical models behind the demo notes in demo-data/. None of them is a sum of damped
// sinusoids: the string is a digital waveguide loop, the bar and the bell are banks of
// second-order IIR resonators driven by a force signal. The analysis is therefore tested on sound
// it did not make. Header-only so the tests can render the notes without files.
//
// Everything is deterministic: a small self-contained RNG (splitmix64), fixed seeds, no
// std::random distributions (their output is implementation-defined), double-precision state.
//
// The models live in demo_blocks.hpp (building blocks), demo_string.hpp (the string) and
// demo_bar_bell.hpp (the bar and the bell); this header gathers them.
#pragma once

#include "demo_bar_bell.hpp"
#include "demo_blocks.hpp"
#include "demo_string.hpp"

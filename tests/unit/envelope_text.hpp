// An envelope as one line of text, for the messages of failing fits.
#pragma once

#include <sstream>
#include <string>

#include "core/envelope.hpp"

namespace wane::test {

/// "peak -6.0 dB, T60 1.00 s until 0.60 s, T60 6.00 s" for messages.
inline std::string describe(const envelope& env) {
    std::ostringstream os;
    os << "attack " << env.attack_s << " s, peak " << env.peak.db << " dB";
    for (const decay_segment& d : env.decay) {
        os << ", T60 " << d.t60_s << " s";
        if (d.until_s) os << " until " << *d.until_s << " s";
    }
    return os.str();
}

}  // namespace wane::test

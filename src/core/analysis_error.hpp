// The one error type of the core for a sound it cannot work on ("no partials above the noise
// floor", "the reference is silent"): the message is user-facing and names no file; the CLI adds
// the file name and maps it to exit code 1 (cli/main.cpp, the one place exit codes are chosen).
// Programming errors (a parameter out of its documented range) stay assertions or
// std::invalid_argument.
#pragma once

#include <stdexcept>

namespace wane {

struct analysis_error : std::runtime_error {
    using std::runtime_error::runtime_error;
};

}  // namespace wane

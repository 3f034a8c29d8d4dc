// Errors raised at the I/O edge. Messages already name the file (and line/column or key where
// there is one); the CLI prints them as "wane: error: <message>" and exits 1.
#pragma once

#include <stdexcept>
#include <string>

namespace wane {

struct io_error : std::runtime_error {
    using std::runtime_error::runtime_error;
};

/// A patch that fails to parse or validate: "file:line:col: partial 3: decay[1].t60_s must not be 0".
struct patch_error : io_error {
    using io_error::io_error;
};

}  // namespace wane

// The patch reader: walks a parsed TOML tree into the model. Every key is read with its type
// checked and its source position recorded under a path like "partial[3].decay[2].t60_s", and the
// whole model goes through the format's validator (core/patch_rules), once as written and once
// rounded to the file's precision. Errors carry "file:line:col: partial 3: decay[2].t60_s must not
// be 0". Unknown keys are the only findings that do not stop the read: they come back as warnings
// naming the nearest known key. The model returned is rounded and in canonical order.
#pragma once

#include <toml++/toml.h>

#include <string_view>

#include "io/patch_toml.hpp"

namespace wane {

/// Reads and validates the tree of a patch; source_name is used in messages. Throws patch_error.
patch_read_result read_patch_tree(const toml::table& root, std::string_view source_name);

}  // namespace wane

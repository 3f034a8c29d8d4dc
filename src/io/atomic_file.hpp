// Atomic output: everything is written to a temporary file in the destination's folder and
// renamed over the destination only when complete, so a crash, a full disk or an interrupt never
// leaves a half-written output.
#pragma once

#include <cstddef>
#include <filesystem>
#include <span>
#include <string_view>

namespace wane {

/// Temporary sibling of a destination; removed in the destructor unless commit() succeeded.
/// While it exists, its temporary path is in a process-wide registry that the interrupt handler
/// (install_interrupt_cleanup) empties on SIGINT/SIGTERM/SIGHUP. Throws io_error when the
/// destination folder is missing, the destination is a folder, or the registry is full
/// (max_live_outputs temporaries at once).
class atomic_output {
public:
    explicit atomic_output(std::filesystem::path destination);
    ~atomic_output();
    atomic_output(const atomic_output&) = delete;
    atomic_output& operator=(const atomic_output&) = delete;

    /// Where to write (same folder as the destination, hidden name ending in .tmp).
    const std::filesystem::path& temp_path() const { return temp_; }
    const std::filesystem::path& destination() const { return dest_; }
    /// fsync + rename over the destination. Throws io_error naming the destination on failure.
    void commit();

private:
    std::filesystem::path dest_;
    std::filesystem::path temp_;
    int slot_ = -1;  ///< registry slot of temp_ (-1: not registered)
    bool committed_ = false;
};

/// Most temporaries alive at once (each holds a registry slot of max_temp_path_bytes).
inline constexpr std::size_t max_live_outputs = 1024;
/// Longest temporary path the registry holds, with its terminating NUL (PATH_MAX on Linux).
inline constexpr std::size_t max_temp_path_bytes = 4096;

/// Installs handlers for SIGINT, SIGTERM and SIGHUP that remove every live temporary output
/// (async-signal-safe: unlink over the registry's fixed slots), write the one line
/// "wane: interrupted; only the files reported as written are complete" to stderr with write(2),
/// and end the process with _exit(128 + signal number) (130 for SIGINT, 143 for SIGTERM). Also
/// makes std::cout flush after every output, so the lines that report finished files are out
/// before any interrupt. Call once, early in main.
void install_interrupt_cleanup();

/// Number of temporaries registered now (for tests).
std::size_t live_output_count();

/// Writes bytes to path atomically (throws io_error naming the path).
void write_file_atomic(const std::filesystem::path& path, std::string_view bytes);

/// Throws io_error when output and any input name the same file (also through links).
void refuse_overwriting_input(const std::filesystem::path& output,
                              std::span<const std::filesystem::path> inputs);

}  // namespace wane

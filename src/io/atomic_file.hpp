// Atomic output: everything is written to a temporary file in the destination's folder and
// renamed over the destination only when complete, so a crash, a full disk or an interrupt never
// leaves a half-written output.
#pragma once

#include <filesystem>
#include <span>
#include <string_view>

namespace wane {

/// Temporary sibling of a destination; removed in the destructor unless commit() succeeded.
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
    bool committed_ = false;
};

/// Writes bytes to path atomically (throws io_error naming the path).
void write_file_atomic(const std::filesystem::path& path, std::string_view bytes);

/// Throws io_error when output and any input name the same file (also through links).
void refuse_overwriting_input(const std::filesystem::path& output,
                              std::span<const std::filesystem::path> inputs);

}  // namespace wane

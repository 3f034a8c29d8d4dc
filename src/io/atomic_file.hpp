// Atomic output: everything is written to a temporary file in the destination's folder and
// renamed over the destination only when complete, so a crash, a full disk or an interrupt never
// leaves a half-written output.
#pragma once

#include <cstddef>
#include <filesystem>
#include <span>
#include <string>
#include <string_view>

#include "platform/interrupt_cleanup.hpp"

namespace wane {

/// Temporary sibling of a destination, created (empty) by the constructor and open for writing
/// as fd(); removed in the destructor unless commit() succeeded. While it exists, its temporary
/// path is registered with platform/interrupt_cleanup, whose handler removes it on
/// SIGINT/SIGTERM/SIGHUP. Creating the temporary and renaming it are change_scopes there: an
/// interrupt waits for them and they never start after it began, so no thread can leave a file
/// behind the handler's cleanup. Write through fd() (or reopen
/// temp_path() without creating it). Throws io_error when the destination folder is missing, the
/// destination is a folder, the temporary cannot be created, or the registry is full
/// (max_live_outputs temporaries at once).
class atomic_output {
public:
    explicit atomic_output(std::filesystem::path destination);
    ~atomic_output();
    atomic_output(const atomic_output&) = delete;
    atomic_output& operator=(const atomic_output&) = delete;

    /// Where to write (same folder as the destination, hidden name ending in .tmp; a short name
    /// when the destination's name leaves no room for the suffix, see temp_sibling_name).
    const std::filesystem::path& temp_path() const { return temp_; }
    const std::filesystem::path& destination() const { return dest_; }
    /// The temporary, open for writing (closed by commit or the destructor).
    int fd() const { return fd_; }
    /// fsync + rename over the destination. Throws io_error naming the destination on failure.
    void commit();

private:
    std::filesystem::path dest_;
    std::filesystem::path temp_;
    int slot_ = -1;  ///< registry slot of temp_ (-1: not registered)
    int fd_ = -1;
    bool committed_ = false;
};

/// The temporary's file name for a destination file name: ".NAME.PID.N.tmp", or ".wane.PID.N.tmp"
/// when that would exceed the longest file name (255 bytes), so every name the system accepts
/// can be written.
std::string temp_sibling_name(const std::string& destination_name, unsigned counter);

/// A hidden folder in which a set of files is built before they are moved into a target folder
/// together ("all or nothing"): created by the constructor inside the target folder
/// (".wane-set.PID.N.tmp", so the moves are renames on one file system), registered so an
/// interrupt removes it with everything in it, and removed with its contents by the destructor
/// unless move_into_target() completed.
class staging_folder {
public:
    /// target must exist and be a folder. Throws io_error.
    explicit staging_folder(const std::filesystem::path& target);
    ~staging_folder();
    staging_folder(const staging_folder&) = delete;
    staging_folder& operator=(const staging_folder&) = delete;

    const std::filesystem::path& path() const { return path_; }
    /// Renames each of names from the staging folder into the target (in order, the last one
    /// last), with SIGINT/SIGTERM/SIGHUP held back until all are moved, then removes the staging
    /// folder. Throws io_error naming the file that failed and how many were moved before it.
    void move_into_target(std::span<const std::string> names);

private:
    std::filesystem::path target_;
    std::filesystem::path path_;
    int slot_ = -1;
    bool moved_ = false;
};

/// Number of temporaries registered now (for tests).
std::size_t live_output_count();

/// Writes bytes to path atomically (throws io_error naming the path).
void write_file_atomic(const std::filesystem::path& path, std::string_view bytes);

/// Throws io_error when output and any input name the same file (also through links).
void refuse_overwriting_input(const std::filesystem::path& output,
                              std::span<const std::filesystem::path> inputs);

}  // namespace wane

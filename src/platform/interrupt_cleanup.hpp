// What happens to the process on SIGINT, SIGTERM and SIGHUP: every registered temporary file and
// staging folder is removed, one line is written to stderr, and the process ends with
// 128 + the signal number. The file formats' side (atomic outputs, staging folders) lives in
// io/atomic_file and registers its temporaries here.
//
// The protocol. A thread that creates or renames a file does so inside a change_scope: the
// signals are held back in that thread and the change is counted; once an interrupt has begun no
// change starts (the thread waits for the process to end), and the handler waits until the
// changes in flight are done before it removes anything. So no thread leaves a file behind the
// cleanup. The registry has fixed slots read by the handler without a lock (async-signal-safe).
#pragma once

#include <csignal>
#include <cstddef>
#include <filesystem>

namespace wane {

/// Most temporaries alive at once (each holds a registry slot of max_temp_path_bytes).
inline constexpr std::size_t max_live_outputs = 1024;
/// Staging folders alive at once (one per keymap run; a few for tests).
inline constexpr std::size_t max_live_folders = 16;
/// Longest temporary path the registry holds, with its terminating NUL (PATH_MAX on Linux).
inline constexpr std::size_t max_temp_path_bytes = 4096;

/// What the handler removes: a file (unlink) or a folder of files (each entry, then the folder).
enum class cleanup_kind { file, folder };

/// Returned by register_for_cleanup instead of a slot.
inline constexpr int cleanup_path_too_long = -2;
inline constexpr int cleanup_registry_full = -1;

/// Registers path for removal on an interrupt; returns its slot (>= 0), or cleanup_path_too_long
/// (path of max_temp_path_bytes or more) or cleanup_registry_full (max_live_outputs files or
/// max_live_folders folders already registered). Call before the file or folder is created.
int register_for_cleanup(cleanup_kind kind, const std::filesystem::path& path);
/// Takes a slot back (no-op for a negative slot). Call after the file was removed or renamed.
void release_cleanup(cleanup_kind kind, int slot);
/// Number of live registrations of a kind (for tests).
std::size_t registered_count(cleanup_kind kind);

/// Holds SIGINT/SIGTERM/SIGHUP back in this thread for the scope's life.
class signals_held {
public:
    signals_held();
    ~signals_held();
    signals_held(const signals_held&) = delete;
    signals_held& operator=(const signals_held&) = delete;

private:
    sigset_t old_{};
};

/// Scope of one file-system change (an open(O_CREAT), mkdir or rename): signals held and the
/// change counted; if an interrupt is already under way the constructor never returns (the
/// handler, in another thread, ends the process).
class change_scope {
public:
    change_scope();
    ~change_scope();
    change_scope(const change_scope&) = delete;
    change_scope& operator=(const change_scope&) = delete;

private:
    sigset_t old_{};
};

/// Installs the handlers for SIGINT, SIGTERM and SIGHUP: remove every registered temporary,
/// write "wane: interrupted; only the files reported as written are complete" to stderr with
/// write(2) (after a newline when stderr is a terminal, so it follows any progress bar), and
/// _exit(128 + signal number) (130 for SIGINT, 143 for SIGTERM). Also makes std::cout flush after
/// every output, so the lines that report finished files are out before any interrupt. Call once,
/// early in main.
void install_interrupt_cleanup();

}  // namespace wane

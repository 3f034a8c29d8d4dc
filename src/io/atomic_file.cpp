#include "io/atomic_file.hpp"

#include <fcntl.h>
#include <signal.h>
#include <unistd.h>

#include <atomic>
#include <cerrno>
#include <csignal>
#include <cstdio>
#include <cstring>
#include <fstream>
#include <iostream>
#include <string>
#include <system_error>

#include "io/errors.hpp"

namespace wane {

namespace fs = std::filesystem;

namespace {

fs::path temp_sibling(const fs::path& dest) {
    static std::atomic<unsigned> counter{0};
    const fs::path folder = dest.has_parent_path() ? dest.parent_path() : fs::path(".");
    std::string name = ".";
    name += dest.filename().string();
    name += '.';
    name += std::to_string(::getpid());
    name += '.';
    name += std::to_string(counter.fetch_add(1));
    name += ".tmp";
    return folder / name;
}

/// The registry of live temporaries. A slot is free (0), being filled or emptied by its owner
/// (1), or live (2): the signal handler reads only live slots, whose path is complete and stays
/// unchanged until the owner takes the slot back, so it needs no lock.
enum slot_state : int { slot_free = 0, slot_busy = 1, slot_live = 2 };
struct temp_slot {
    std::atomic<int> state{slot_free};
    char path[max_temp_path_bytes] = {};
};
static_assert(std::atomic<int>::is_always_lock_free, "the signal handler needs lock-free atomics");
temp_slot live_temps[max_live_outputs];

int register_temp(const fs::path& temp) {
    const std::string& text = temp.native();
    if (text.size() >= max_temp_path_bytes) {
        throw io_error(temp.string() + ": path too long for an output (" + std::to_string(max_temp_path_bytes - 1) +
                       " bytes at most)");
    }
    for (std::size_t i = 0; i < max_live_outputs; ++i) {
        int expected = slot_free;
        if (live_temps[i].state.compare_exchange_strong(expected, slot_busy, std::memory_order_acquire)) {
            std::memcpy(live_temps[i].path, text.c_str(), text.size() + 1);
            live_temps[i].state.store(slot_live, std::memory_order_release);
            return static_cast<int>(i);
        }
    }
    throw io_error(temp.string() + ": more than " + std::to_string(max_live_outputs) + " outputs open at once");
}

void deregister_temp(int slot) {
    if (slot < 0) return;
    temp_slot& s = live_temps[static_cast<std::size_t>(slot)];
    s.state.store(slot_busy, std::memory_order_relaxed);
    s.path[0] = '\0';
    s.state.store(slot_free, std::memory_order_release);
}

/// Whether stderr was a terminal when the handlers were installed (then the interrupt line starts
/// on a fresh line, after any progress bar).
volatile std::sig_atomic_t stderr_is_terminal = 0;

void on_interrupt(int signal_number) {
    for (temp_slot& s : live_temps) {
        if (s.state.load(std::memory_order_acquire) == slot_live) ::unlink(s.path);
    }
    static constexpr char message[] = "wane: interrupted; only the files reported as written are complete\n";
    if (stderr_is_terminal != 0) (void)!::write(STDERR_FILENO, "\n", 1);
    (void)!::write(STDERR_FILENO, message, sizeof message - 1);
    constexpr int signal_exit_base = 128;  // shell convention: exit status 128 + signal number
    ::_exit(signal_exit_base + signal_number);
}

void fsync_path(const fs::path& path) {
    const int fd = ::open(path.c_str(), O_RDONLY);
    if (fd >= 0) {
        ::fsync(fd);
        ::close(fd);
    }
}

}  // namespace

atomic_output::atomic_output(fs::path destination) : dest_(std::move(destination)), temp_(temp_sibling(dest_)) {
    const fs::path folder = dest_.has_parent_path() ? dest_.parent_path() : fs::path(".");
    std::error_code ec;
    if (!fs::is_directory(folder, ec)) {
        const bool exists = fs::exists(folder, ec);
        throw io_error(dest_.string() + ": output folder '" + folder.string() +
                       (exists ? "' is not a folder" : "' does not exist"));
    }
    if (fs::is_directory(dest_, ec)) throw io_error(dest_.string() + ": is a directory");
    slot_ = register_temp(temp_);  // before the temporary exists, so an interrupt never misses it
}

atomic_output::~atomic_output() {
    if (!committed_) {
        std::error_code ec;
        fs::remove(temp_, ec);
    }
    deregister_temp(slot_);  // after the removal: an interrupt in between unlinks a missing file
}

void atomic_output::commit() {
    fsync_path(temp_);
    std::error_code ec;
    fs::rename(temp_, dest_, ec);
    if (ec) throw io_error(dest_.string() + ": cannot write: " + ec.message());
    committed_ = true;
    deregister_temp(slot_);
    slot_ = -1;
}

void install_interrupt_cleanup() {
    std::cout.setf(std::ios::unitbuf);
    stderr_is_terminal = ::isatty(STDERR_FILENO) != 0 ? 1 : 0;
    struct sigaction action {};
    action.sa_handler = on_interrupt;
    sigfillset(&action.sa_mask);  // nothing interrupts the cleanup
    for (const int signal_number : {SIGINT, SIGTERM, SIGHUP}) ::sigaction(signal_number, &action, nullptr);
}

std::size_t live_output_count() {
    std::size_t n = 0;
    for (const temp_slot& s : live_temps) n += s.state.load(std::memory_order_acquire) == slot_live ? 1 : 0;
    return n;
}

void write_file_atomic(const fs::path& path, std::string_view bytes) {
    atomic_output out(path);
    {
        std::ofstream f(out.temp_path(), std::ios::binary | std::ios::trunc);
        if (!f) throw io_error(path.string() + ": cannot write: " + std::strerror(errno));
        f.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
        f.flush();
        if (!f) throw io_error(path.string() + ": write failed (disk full?)");
    }
    out.commit();
}

void refuse_overwriting_input(const fs::path& output, std::span<const fs::path> inputs) {
    std::error_code ec;
    for (const fs::path& in : inputs) {
        if (fs::exists(output, ec) && fs::equivalent(output, in, ec)) {
            throw io_error(output.string() + ": output would overwrite the input file");
        }
        if (fs::weakly_canonical(output, ec) == fs::weakly_canonical(in, ec)) {
            throw io_error(output.string() + ": output would overwrite the input file");
        }
    }
}

}  // namespace wane

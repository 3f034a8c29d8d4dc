#include "io/atomic_file.hpp"

#include <dirent.h>
#include <fcntl.h>
#include <signal.h>
#include <sys/stat.h>
#include <sys/syscall.h>
#include <unistd.h>

#include <atomic>
#include <cerrno>
#include <climits>
#include <csignal>
#include <cstdio>
#include <cstring>
#include <ctime>
#include <iostream>
#include <string>
#include <system_error>

#include "io/errors.hpp"

namespace wane {

namespace fs = std::filesystem;

namespace {

std::atomic<unsigned> temp_counter{0};

/// The registry of live temporaries (files) and staging folders. A slot is free (0), being filled
/// or emptied by its owner (1), or live (2): the signal handler reads only live slots, whose path
/// is complete and stays unchanged until the owner takes the slot back, so it needs no lock.
enum slot_state : int { slot_free = 0, slot_busy = 1, slot_live = 2 };
struct temp_slot {
    std::atomic<int> state{slot_free};
    char path[max_temp_path_bytes] = {};
};
static_assert(std::atomic<int>::is_always_lock_free, "the signal handler needs lock-free atomics");
temp_slot live_temps[max_live_outputs];
/// Staging folders alive at once (one per keymap run; a few for tests).
constexpr std::size_t max_live_folders = 16;
temp_slot live_folders[max_live_folders];

/// The interrupt protocol. A thread that creates or renames a file holds the signals back and
/// counts itself in changes_in_flight; once `stopping` is set (by the handler) no change starts,
/// and the handler waits until the changes in flight are done before it removes anything.
std::atomic<int> changes_in_flight{0};
std::atomic<int> stopping{0};
static_assert(std::atomic<int>::is_always_lock_free);

sigset_t interrupt_signals() {
    sigset_t set;
    sigemptyset(&set);
    for (const int s : {SIGINT, SIGTERM, SIGHUP}) sigaddset(&set, s);
    return set;
}

/// Scope of one file-system change (see above). If an interrupt is under way, the thread waits
/// here for the process to end instead of changing anything.
class fs_change {
public:
    fs_change() {
        const sigset_t set = interrupt_signals();
        ::pthread_sigmask(SIG_BLOCK, &set, &old_);
        changes_in_flight.fetch_add(1);
        if (stopping.load() != 0) {
            changes_in_flight.fetch_sub(1);
            ::pthread_sigmask(SIG_SETMASK, &old_, nullptr);
            for (;;) ::pause();  // the handler (in another thread) ends the process
        }
    }
    ~fs_change() {
        changes_in_flight.fetch_sub(1);
        ::pthread_sigmask(SIG_SETMASK, &old_, nullptr);
    }
    fs_change(const fs_change&) = delete;
    fs_change& operator=(const fs_change&) = delete;

private:
    sigset_t old_{};
};

int register_path(temp_slot* slots, std::size_t count, const fs::path& p, const char* what) {
    const std::string& text = p.native();
    if (text.size() >= max_temp_path_bytes) {
        throw io_error(p.string() + ": path too long for an output (" + std::to_string(max_temp_path_bytes - 1) +
                       " bytes at most)");
    }
    for (std::size_t i = 0; i < count; ++i) {
        int expected = slot_free;
        if (slots[i].state.compare_exchange_strong(expected, slot_busy, std::memory_order_acquire)) {
            std::memcpy(slots[i].path, text.c_str(), text.size() + 1);
            slots[i].state.store(slot_live, std::memory_order_release);
            return static_cast<int>(i);
        }
    }
    throw io_error(p.string() + ": more than " + std::to_string(count) + " " + what + " open at once");
}

void deregister(temp_slot* slots, int slot) {
    if (slot < 0) return;
    temp_slot& s = slots[static_cast<std::size_t>(slot)];
    s.state.store(slot_busy, std::memory_order_relaxed);
    s.path[0] = '\0';
    s.state.store(slot_free, std::memory_order_release);
}

/// Whether stderr was a terminal when the handlers were installed (then the interrupt line starts
/// on a fresh line, after any progress bar).
volatile std::sig_atomic_t stderr_is_terminal = 0;

/// Removes every entry of a folder and the folder (async-signal-safe: raw getdents64, unlinkat;
/// staging folders hold files only).
void remove_folder_in_handler(const char* path) {
    const int fd = ::open(path, O_RDONLY | O_DIRECTORY | O_CLOEXEC);
    if (fd < 0) return;
    alignas(8) static char buf[16384];
    for (;;) {
        const long n = ::syscall(SYS_getdents64, fd, buf, sizeof buf);
        if (n <= 0) break;
        for (long off = 0; off < n;) {
            // struct linux_dirent64: u64 ino, s64 off, u16 reclen, u8 type, char name[].
            unsigned short reclen = 0;
            std::memcpy(&reclen, buf + off + 16, sizeof reclen);
            const char* name = buf + off + 19;
            if (std::strcmp(name, ".") != 0 && std::strcmp(name, "..") != 0) ::unlinkat(fd, name, 0);
            off += reclen;
        }
    }
    ::close(fd);
    ::rmdir(path);
}

void on_interrupt(int signal_number) {
    stopping.store(1);
    // Each change in flight is one open(2) or rename(2): wait for them (at most about 2 s).
    constexpr int max_waits = 2000;
    const timespec one_ms{0, 1000000};
    for (int i = 0; i < max_waits && changes_in_flight.load() > 0; ++i) ::nanosleep(&one_ms, nullptr);
    for (temp_slot& s : live_temps) {
        if (s.state.load(std::memory_order_acquire) == slot_live) ::unlink(s.path);
    }
    for (temp_slot& s : live_folders) {
        if (s.state.load(std::memory_order_acquire) == slot_live) remove_folder_in_handler(s.path);
    }
    static constexpr char message[] = "wane: interrupted; only the files reported as written are complete\n";
    if (stderr_is_terminal != 0) (void)!::write(STDERR_FILENO, "\n", 1);
    (void)!::write(STDERR_FILENO, message, sizeof message - 1);
    constexpr int signal_exit_base = 128;  // shell convention: exit status 128 + signal number
    ::_exit(signal_exit_base + signal_number);
}

fs::path folder_of(const fs::path& p) { return p.has_parent_path() ? p.parent_path() : fs::path("."); }

}  // namespace

std::string temp_sibling_name(const std::string& destination_name, unsigned counter) {
    const std::string suffix = "." + std::to_string(::getpid()) + "." + std::to_string(counter) + ".tmp";
    constexpr std::size_t max_name_bytes = NAME_MAX;  // 255 on Linux
    if (1 + destination_name.size() + suffix.size() <= max_name_bytes) return "." + destination_name + suffix;
    return ".wane" + suffix;  // unique all the same: the process id and the counter
}

atomic_output::atomic_output(fs::path destination) : dest_(std::move(destination)) {
    const fs::path folder = folder_of(dest_);
    std::error_code ec;
    if (!fs::is_directory(folder, ec)) {
        const bool exists = fs::exists(folder, ec);
        throw io_error(dest_.string() + ": output folder '" + folder.string() +
                       (exists ? "' is not a folder" : "' does not exist"));
    }
    if (fs::is_directory(dest_, ec)) throw io_error(dest_.string() + ": is a directory");
    temp_ = folder / temp_sibling_name(dest_.filename().string(), temp_counter.fetch_add(1));
    slot_ = register_path(live_temps, max_live_outputs, temp_, "outputs");  // before the file exists
    constexpr mode_t file_mode = 0666;  // less the umask, as for any new file
    {
        const fs_change change;
        fd_ = ::open(temp_.c_str(), O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, file_mode);
    }
    if (fd_ < 0) {
        const int err = errno;
        deregister(live_temps, slot_);
        slot_ = -1;
        throw io_error(dest_.string() + ": cannot write: " + std::strerror(err));
    }
}

atomic_output::~atomic_output() {
    if (fd_ >= 0) ::close(fd_);
    if (!committed_) {
        std::error_code ec;
        fs::remove(temp_, ec);
    }
    deregister(live_temps, slot_);  // after the removal: an interrupt in between unlinks a missing file
}

void atomic_output::commit() {
    const int sync_rc = ::fsync(fd_);
    const int sync_err = errno;
    const int close_rc = ::close(fd_);
    fd_ = -1;
    if (sync_rc != 0 || close_rc != 0) {
        throw io_error(dest_.string() + ": write failed: " + std::strerror(sync_rc != 0 ? sync_err : errno));
    }
    std::error_code ec;
    {
        const fs_change change;
        fs::rename(temp_, dest_, ec);
    }
    if (ec) throw io_error(dest_.string() + ": cannot write: " + ec.message());
    committed_ = true;
    deregister(live_temps, slot_);
    slot_ = -1;
}

staging_folder::staging_folder(const fs::path& target) : target_(target) {
    std::error_code ec;
    if (!fs::is_directory(target_, ec)) throw io_error(target_.string() + ": is not a folder");
    path_ = target_ / (".wane-set." + std::to_string(::getpid()) + "." + std::to_string(temp_counter.fetch_add(1)) + ".tmp");
    slot_ = register_path(live_folders, max_live_folders, path_, "staging folders");
    constexpr mode_t folder_mode = 0777;  // less the umask
    int rc = 0;
    {
        const fs_change change;
        rc = ::mkdir(path_.c_str(), folder_mode);
    }
    if (rc != 0) {
        const int err = errno;
        deregister(live_folders, slot_);
        slot_ = -1;
        throw io_error(target_.string() + ": cannot create a staging folder in it: " + std::strerror(err));
    }
}

staging_folder::~staging_folder() {
    if (!moved_) {
        std::error_code ec;
        fs::remove_all(path_, ec);
    }
    deregister(live_folders, slot_);
}

void staging_folder::move_into_target(std::span<const std::string> names) {
    // Hold the interrupts back for the whole move: it is short (renames only), and an interrupt
    // in the middle would leave a mixed set.
    const sigset_t set = interrupt_signals();
    sigset_t old;
    ::pthread_sigmask(SIG_BLOCK, &set, &old);
    std::size_t moved = 0;
    std::error_code ec;
    for (const std::string& name : names) {
        fs::rename(path_ / name, target_ / name, ec);
        if (ec) break;
        ++moved;
    }
    if (!ec) {
        fs::remove(path_, ec);
        moved_ = !ec;
    }
    ::pthread_sigmask(SIG_SETMASK, &old, nullptr);
    if (moved < names.size()) {
        throw io_error((target_ / names[moved]).string() + ": cannot move into place: " + ec.message() + " (" +
                       std::to_string(moved) + " of " + std::to_string(names.size()) +
                       " files of the new set were moved in before it; the others are not written)");
    }
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
    while (!bytes.empty()) {
        const ssize_t n = ::write(out.fd(), bytes.data(), bytes.size());
        if (n < 0 && errno == EINTR) continue;
        if (n <= 0) throw io_error(path.string() + ": write failed: " + std::strerror(n < 0 ? errno : ENOSPC));
        bytes.remove_prefix(static_cast<std::size_t>(n));
    }
    out.commit();
}

void refuse_overwriting_input(const fs::path& output, std::span<const fs::path> inputs) {
    std::error_code ec;
    for (const fs::path& in : inputs) {
        if (fs::exists(output, ec) && fs::equivalent(output, in, ec)) {
            throw io_error(output.string() + ": output would overwrite the input file " + in.string());
        }
        if (fs::weakly_canonical(output, ec) == fs::weakly_canonical(in, ec)) {
            throw io_error(output.string() + ": output would overwrite the input file " + in.string());
        }
    }
}

}  // namespace wane

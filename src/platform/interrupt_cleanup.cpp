#include "platform/interrupt_cleanup.hpp"

#include <fcntl.h>
#include <pthread.h>
#include <sys/syscall.h>
#include <unistd.h>

#include <atomic>
#include <cstring>
#include <ctime>
#include <iostream>
#include <string>

namespace wane {

namespace {

/// A registry slot is free (0), being filled or emptied by its owner (1), or live (2): the
/// handler reads only live slots, whose path is complete and stays unchanged until the owner
/// takes the slot back, so it needs no lock.
enum slot_state : int { slot_free = 0, slot_busy = 1, slot_live = 2 };
struct cleanup_slot {
    std::atomic<int> state{slot_free};
    char path[max_temp_path_bytes] = {};
};
static_assert(std::atomic<int>::is_always_lock_free, "the signal handler needs lock-free atomics");
cleanup_slot live_files[max_live_outputs];
cleanup_slot live_folders[max_live_folders];

/// Changes in flight, and whether an interrupt has begun (see the protocol in the header).
std::atomic<int> changes_in_flight{0};
std::atomic<int> stopping{0};

/// Whether stderr was a terminal when the handlers were installed.
volatile std::sig_atomic_t stderr_is_terminal = 0;

struct slot_span {
    cleanup_slot* slots;
    std::size_t count;
};
slot_span slots_of(cleanup_kind kind) {
    if (kind == cleanup_kind::file) return {live_files, max_live_outputs};
    return {live_folders, max_live_folders};
}

sigset_t interrupt_signals() {
    sigset_t set;
    sigemptyset(&set);
    for (const int s : {SIGINT, SIGTERM, SIGHUP}) sigaddset(&set, s);
    return set;
}

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
    // Each change in flight is one open(2), mkdir(2) or rename(2): wait for them (at most about 2 s).
    constexpr int max_waits = 2000;
    const timespec one_ms{0, 1000000};
    for (int i = 0; i < max_waits && changes_in_flight.load() > 0; ++i) ::nanosleep(&one_ms, nullptr);
    for (cleanup_slot& s : live_files) {
        if (s.state.load(std::memory_order_acquire) == slot_live) ::unlink(s.path);
    }
    for (cleanup_slot& s : live_folders) {
        if (s.state.load(std::memory_order_acquire) == slot_live) remove_folder_in_handler(s.path);
    }
    static constexpr char message[] = "wane: interrupted; only the files reported as written are complete\n";
    if (stderr_is_terminal != 0) (void)!::write(STDERR_FILENO, "\n", 1);
    (void)!::write(STDERR_FILENO, message, sizeof message - 1);
    constexpr int signal_exit_base = 128;  // shell convention: exit status 128 + signal number
    ::_exit(signal_exit_base + signal_number);
}

}  // namespace

int register_for_cleanup(cleanup_kind kind, const std::filesystem::path& path) {
    const std::string& text = path.native();
    if (text.size() >= max_temp_path_bytes) return cleanup_path_too_long;
    const slot_span all = slots_of(kind);
    for (std::size_t i = 0; i < all.count; ++i) {
        int expected = slot_free;
        if (all.slots[i].state.compare_exchange_strong(expected, slot_busy, std::memory_order_acquire)) {
            std::memcpy(all.slots[i].path, text.c_str(), text.size() + 1);
            all.slots[i].state.store(slot_live, std::memory_order_release);
            return static_cast<int>(i);
        }
    }
    return cleanup_registry_full;
}

void release_cleanup(cleanup_kind kind, int slot) {
    if (slot < 0) return;
    cleanup_slot& s = slots_of(kind).slots[static_cast<std::size_t>(slot)];
    s.state.store(slot_busy, std::memory_order_relaxed);
    s.path[0] = '\0';
    s.state.store(slot_free, std::memory_order_release);
}

std::size_t registered_count(cleanup_kind kind) {
    const slot_span all = slots_of(kind);
    std::size_t n = 0;
    for (std::size_t i = 0; i < all.count; ++i) {
        n += all.slots[i].state.load(std::memory_order_acquire) == slot_live ? 1 : 0;
    }
    return n;
}

signals_held::signals_held() {
    const sigset_t set = interrupt_signals();
    ::pthread_sigmask(SIG_BLOCK, &set, &old_);
}

signals_held::~signals_held() { ::pthread_sigmask(SIG_SETMASK, &old_, nullptr); }

change_scope::change_scope() {
    const sigset_t set = interrupt_signals();
    ::pthread_sigmask(SIG_BLOCK, &set, &old_);
    changes_in_flight.fetch_add(1);
    if (stopping.load() != 0) {
        changes_in_flight.fetch_sub(1);
        ::pthread_sigmask(SIG_SETMASK, &old_, nullptr);
        for (;;) ::pause();  // the handler (in another thread) ends the process
    }
}

change_scope::~change_scope() {
    changes_in_flight.fetch_sub(1);
    ::pthread_sigmask(SIG_SETMASK, &old_, nullptr);
}

void install_interrupt_cleanup() {
    std::cout.setf(std::ios::unitbuf);
    stderr_is_terminal = ::isatty(STDERR_FILENO) != 0 ? 1 : 0;
    struct sigaction action {};
    action.sa_handler = on_interrupt;
    sigfillset(&action.sa_mask);  // nothing interrupts the cleanup
    for (const int signal_number : {SIGINT, SIGTERM, SIGHUP}) ::sigaction(signal_number, &action, nullptr);
}

}  // namespace wane

#include "io/atomic_file.hpp"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <atomic>
#include <cerrno>
#include <climits>
#include <cstring>
#include <string>
#include <system_error>

#include "core/text_format.hpp"
#include "io/errors.hpp"
#include "platform/interrupt_cleanup.hpp"

namespace wane {

namespace fs = std::filesystem;

namespace {

std::atomic<unsigned> temp_counter{0};

/// Registers a temporary for the interrupt cleanup, or throws io_error naming it.
int register_or_throw(cleanup_kind kind, const fs::path& p) {
    const int slot = register_for_cleanup(kind, p);
    if (slot == cleanup_path_too_long) {
        throw io_error(p.string() + ": path too long for an output (" + std::to_string(max_temp_path_bytes - 1) +
                       " bytes at most)");
    }
    if (slot < 0) {
        const bool file = kind == cleanup_kind::file;
        const std::string what = file ? "outputs" : "staging folders";
        const std::size_t most = file ? max_live_outputs : max_live_folders;
        throw io_error(printf_text("%s: more than %zu %s open at once", p.c_str(), most, what.c_str()));
    }
    return slot;
}

fs::path folder_of(const fs::path& p) { return p.has_parent_path() ? p.parent_path() : fs::path("."); }

}  // namespace

std::string temp_sibling_name(const std::string& destination_name, unsigned counter) {
    const std::string suffix = printf_text(".%ld.%u.tmp", static_cast<long>(::getpid()), counter);
    constexpr std::size_t max_name_bytes = NAME_MAX;  // 255 on Linux
    // Unique all the same when shortened: the process id and the counter.
    const bool fits = 1 + destination_name.size() + suffix.size() <= max_name_bytes;
    std::string name(".");
    name.append(fits ? destination_name : std::string("wane")).append(suffix);
    return name;
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
    slot_ = register_or_throw(cleanup_kind::file, temp_);  // before the file exists
    constexpr mode_t file_mode = 0666;  // less the umask, as for any new file
    {
        const change_scope change;
        fd_ = ::open(temp_.c_str(), O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, file_mode);
    }
    if (fd_ < 0) {
        const int err = errno;
        release_cleanup(cleanup_kind::file, slot_);
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
    release_cleanup(cleanup_kind::file, slot_);  // after the removal: an interrupt in between unlinks a missing file
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
        const change_scope change;
        fs::rename(temp_, dest_, ec);
    }
    if (ec) throw io_error(dest_.string() + ": cannot write: " + ec.message());
    committed_ = true;
    release_cleanup(cleanup_kind::file, slot_);
    slot_ = -1;
}

staging_folder::staging_folder(const fs::path& target) : target_(target) {
    std::error_code ec;
    if (!fs::is_directory(target_, ec)) throw io_error(target_.string() + ": is not a folder");
    path_ = target_ / (".wane-set." + std::to_string(::getpid()) + "." + std::to_string(temp_counter.fetch_add(1)) + ".tmp");
    slot_ = register_or_throw(cleanup_kind::folder, path_);
    constexpr mode_t folder_mode = 0777;  // less the umask
    int rc = 0;
    {
        const change_scope change;
        rc = ::mkdir(path_.c_str(), folder_mode);
    }
    if (rc != 0) {
        const int err = errno;
        release_cleanup(cleanup_kind::folder, slot_);
        slot_ = -1;
        throw io_error(target_.string() + ": cannot create a staging folder in it: " + std::strerror(err));
    }
}

staging_folder::~staging_folder() {
    if (!moved_) {
        std::error_code ec;
        fs::remove_all(path_, ec);
    }
    release_cleanup(cleanup_kind::folder, slot_);
}

void staging_folder::move_into_target(std::span<const std::string> names) {
    // Hold the interrupts back for the whole move: it is short (renames only), and an interrupt
    // in the middle would leave a mixed set.
    std::size_t moved = 0;
    std::error_code ec;
    {
        const signals_held held;
        for (const std::string& name : names) {
            fs::rename(path_ / name, target_ / name, ec);
            if (ec) break;
            ++moved;
        }
        if (!ec) {
            fs::remove(path_, ec);
            moved_ = !ec;
        }
    }
    if (moved < names.size()) {
        throw io_error((target_ / names[moved]).string() + ": cannot move into place: " + ec.message() + " (" +
                       std::to_string(moved) + " of " + std::to_string(names.size()) +
                       " files of the new set were moved in before it; the others are not written)");
    }
}

std::size_t live_output_count() { return registered_count(cleanup_kind::file); }

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

#include "io/atomic_file.hpp"

#include <fcntl.h>
#include <unistd.h>

#include <atomic>
#include <cerrno>
#include <cstdio>
#include <cstring>
#include <fstream>
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
}

atomic_output::~atomic_output() {
    if (!committed_) {
        std::error_code ec;
        fs::remove(temp_, ec);
    }
}

void atomic_output::commit() {
    fsync_path(temp_);
    std::error_code ec;
    fs::rename(temp_, dest_, ec);
    if (ec) throw io_error(dest_.string() + ": cannot write: " + ec.message());
    committed_ = true;
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

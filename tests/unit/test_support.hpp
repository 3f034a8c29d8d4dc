// Small helpers shared by the test programs.
#pragma once

#include <unistd.h>

#include <atomic>
#include <filesystem>
#include <string>
#include <system_error>

namespace wane::test {

/// A fresh folder under the system temp dir, named after the test program and the process,
/// removed at the end of the scope.
struct scratch_dir {
    std::filesystem::path path;
    explicit scratch_dir(const std::string& tag) {
        static std::atomic<int> counter{0};
        path = std::filesystem::temp_directory_path() /
               ("wane_test_" + tag + "_" + std::to_string(::getpid()) + "_" + std::to_string(counter++));
        std::filesystem::remove_all(path);
        std::filesystem::create_directories(path);
    }
    ~scratch_dir() {
        std::error_code ec;
        std::filesystem::remove_all(path, ec);
    }
    scratch_dir(const scratch_dir&) = delete;
    scratch_dir& operator=(const scratch_dir&) = delete;
    std::filesystem::path operator/(const std::string& name) const { return path / name; }
};

}  // namespace wane::test

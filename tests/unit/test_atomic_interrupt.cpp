// Interrupt cleanup (io/atomic_file.hpp): a process interrupted while atomic outputs are open
// leaves no temporary file and no destination, prints the interrupt line and exits 128 + signal.
// Each case runs in a forked child that raises the signal itself, so the moment is exact.
#include <catch2/catch.hpp>

#include <fcntl.h>
#include <sys/wait.h>
#include <unistd.h>

#include <csignal>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <memory>
#include <string>
#include <utility>
#include <vector>

#include "io/atomic_file.hpp"

namespace fs = std::filesystem;

namespace {

struct child_result {
    int exit_code = -1;
    std::string stderr_text;
};

/// Forks; the child opens `count` atomic outputs in dir, writes into their temporaries, records
/// the temporary paths in dir/temps.txt, then raises sig. Returns the child's exit code and stderr.
child_result interrupted_child(const fs::path& dir, int count, int sig) {
    const fs::path err = dir / "stderr.txt";
    const pid_t pid = ::fork();
    if (pid == 0) {
        const int fd = ::open(err.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0644);
        ::dup2(fd, STDERR_FILENO);
        wane::install_interrupt_cleanup();
        std::vector<std::unique_ptr<wane::atomic_output>> outs;
        std::ofstream list(dir / "temps.txt");
        for (int i = 0; i < count; ++i) {
            outs.push_back(std::make_unique<wane::atomic_output>(dir / ("out" + std::to_string(i) + ".wav")));
            std::ofstream(outs.back()->temp_path()) << "half-written";
            list << outs.back()->temp_path().string() << '\n';
        }
        list.close();
        if (wane::live_output_count() != static_cast<std::size_t>(count)) ::_exit(3);
        ::raise(sig);
        ::_exit(4);  // not reached: the handler exits
    }
    int status = 0;
    ::waitpid(pid, &status, 0);
    child_result r;
    r.exit_code = WIFEXITED(status) ? WEXITSTATUS(status) : -1;
    std::ifstream f(err);
    r.stderr_text.assign(std::istreambuf_iterator<char>(f), std::istreambuf_iterator<char>());
    return r;
}

}  // namespace

TEST_CASE("an interrupt removes every open temporary and exits 128 + signal", "[atomic]") {
    const auto [sig, want] = GENERATE(std::pair{SIGINT, 130}, std::pair{SIGTERM, 143}, std::pair{SIGHUP, 129});
    const int count = GENERATE(1, 5, 300);
    const fs::path dir = fs::temp_directory_path() / ("wane_test_atomic_interrupt_" + std::to_string(::getpid()));
    fs::remove_all(dir);
    fs::create_directories(dir);
    const child_result r = interrupted_child(dir, count, sig);
    CAPTURE(sig, count, r.exit_code, r.stderr_text);
    CHECK(r.exit_code == want);
    CHECK(r.stderr_text == "wane: interrupted; only the files reported as written are complete\n");
    // The temporaries existed (the child listed them after writing) and are gone; no destination.
    std::ifstream list(dir / "temps.txt");
    int listed = 0;
    for (std::string line; std::getline(list, line); ++listed) CHECK_FALSE(fs::exists(line));
    CHECK(listed == count);
    for (int i = 0; i < count; ++i) CHECK_FALSE(fs::exists(dir / ("out" + std::to_string(i) + ".wav")));
    fs::remove_all(dir);
}

TEST_CASE("committed and destroyed outputs leave the registry", "[atomic]") {
    const fs::path dir = fs::temp_directory_path() / ("wane_test_atomic_registry_" + std::to_string(::getpid()));
    fs::remove_all(dir);
    fs::create_directories(dir);
    const std::size_t before = wane::live_output_count();
    {
        wane::atomic_output a(dir / "a.txt");
        wane::atomic_output b(dir / "b.txt");
        CHECK(wane::live_output_count() == before + 2);
        std::ofstream(a.temp_path()) << "a";
        a.commit();
        CHECK(wane::live_output_count() == before + 1);
    }
    CHECK(wane::live_output_count() == before);
    CHECK(fs::exists(dir / "a.txt"));
    CHECK_FALSE(fs::exists(dir / "b.txt"));
    fs::remove_all(dir);
}

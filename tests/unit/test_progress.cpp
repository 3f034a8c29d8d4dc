// The progress bar: draws on stderr only when it is a terminal (a pseudo-terminal from
// openpty(3) stands in for one) and not quiet; nothing otherwise; safe from several threads.
#include <catch2/catch.hpp>

#include <fcntl.h>
#include <pty.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <string>
#include <thread>
#include <vector>

#include "platform/progress.hpp"

using namespace wane;

namespace {

/// Points fd 2 at another descriptor for the lifetime of the object.
struct stderr_redirect {
    int saved = -1;
    explicit stderr_redirect(int fd) {
        std::fflush(stderr);
        saved = ::dup(STDERR_FILENO);
        REQUIRE(saved >= 0);
        REQUIRE(::dup2(fd, STDERR_FILENO) == STDERR_FILENO);
    }
    ~stderr_redirect() {
        std::fflush(stderr);
        ::dup2(saved, STDERR_FILENO);
        ::close(saved);
    }
};

struct pseudo_terminal {
    int master = -1, slave = -1;
    pseudo_terminal() {
        REQUIRE(::openpty(&master, &slave, nullptr, nullptr, nullptr) == 0);
        ::fcntl(master, F_SETFL, ::fcntl(master, F_GETFL) | O_NONBLOCK);
    }
    ~pseudo_terminal() {
        ::close(master);
        ::close(slave);
    }
    std::string drain() const {
        std::string out;
        char buf[4096];
        for (;;) {
            const ssize_t got = ::read(master, buf, sizeof buf);
            if (got <= 0) break;
            out.append(buf, static_cast<std::size_t>(got));
        }
        return out;
    }
};

void advance_from_threads(progress_bar& bar, int threads, int per_thread) {
    std::vector<std::thread> pool;
    pool.reserve(static_cast<std::size_t>(threads));
    for (int t = 0; t < threads; ++t) {
        pool.emplace_back([&bar, per_thread] {
            for (int i = 0; i < per_thread; ++i) bar.advance();
        });
    }
    for (auto& th : pool) th.join();
}

}  // namespace

TEST_CASE("nothing is drawn when stderr is not a terminal", "[progress]") {
    std::FILE* sink = std::tmpfile();
    REQUIRE(sink != nullptr);
    std::size_t done = 0;
    bool drawing = true;
    {
        stderr_redirect redirect(::fileno(sink));
        progress_bar bar("analyzing", 4000, false);
        drawing = bar.drawing();
        advance_from_threads(bar, 4, 1000);
        done = bar.done();
        bar.finish();
    }
    std::fseek(sink, 0, SEEK_END);
    const long bytes = std::ftell(sink);
    std::fclose(sink);
    CAPTURE(bytes, done);
    CHECK_FALSE(drawing);
    CHECK(bytes == 0);
    CHECK(done == 4000);  // the counter is exact under concurrent advances
}

TEST_CASE("on a terminal the bar is drawn, throttled, and ends at 100%", "[progress]") {
    pseudo_terminal pty;
    std::string shown;
    bool drawing = false;
    double elapsed_ms = 0.0;
    {
        stderr_redirect redirect(pty.slave);
        const auto start = std::chrono::steady_clock::now();
        progress_bar bar("rendering", 8000, false);
        drawing = bar.drawing();
        advance_from_threads(bar, 4, 2000);
        elapsed_ms = std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - start).count();
        bar.finish();
        bar.finish();  // a second finish draws nothing more
    }
    shown = pty.drain();
    const auto redraws = static_cast<double>(std::count(shown.begin(), shown.end(), '\r'));
    // Redraws: at most one per interval elapsed, plus the first and the final one (and the
    // terminal's \n -> \r\n translation of the final newline).
    const double interval_ms = static_cast<double>(progress_bar::redraw_interval.count());
    const double bound = elapsed_ms / interval_ms + 3.0;
    CAPTURE(shown, redraws, elapsed_ms, bound);
    CHECK(drawing);
    CHECK(shown.find("rendering") != std::string::npos);
    CHECK(shown.find("100% (8000/8000)") != std::string::npos);
    CHECK(redraws <= bound);
    CHECK(std::count(shown.begin(), shown.end(), '\n') == 1);
}

TEST_CASE("quiet draws nothing even on a terminal", "[progress]") {
    pseudo_terminal pty;
    bool drawing = true;
    {
        stderr_redirect redirect(pty.slave);
        progress_bar bar("analyzing", 10, true);
        drawing = bar.drawing();
        for (int i = 0; i < 10; ++i) bar.advance();
        bar.finish();
    }
    const std::string shown = pty.drain();
    CAPTURE(shown);
    CHECK_FALSE(drawing);
    CHECK(shown.empty());
}

TEST_CASE("an unfinished bar ends its line without claiming completion", "[progress]") {
    pseudo_terminal pty;
    {
        stderr_redirect redirect(pty.slave);
        progress_bar bar("batch", 10, false);
        bar.advance(3);
    }
    const std::string shown = pty.drain();
    CAPTURE(shown);
    CHECK(shown.find("30% (3/10)") != std::string::npos);
    CHECK(shown.find("100%") == std::string::npos);
    CHECK(std::count(shown.begin(), shown.end(), '\n') == 1);
}

// A progress bar for long work (a long file, a batch), drawn on stderr only when stderr is a
// terminal and --quiet is off; otherwise it draws nothing at all. Safe to advance from several
// threads at once.
#pragma once

#include <atomic>
#include <chrono>
#include <cstddef>
#include <cstdint>
#include <mutex>
#include <string>

namespace wane {

class progress_bar {
public:
    /// total: units of work expected (0 is treated as 1). quiet: never draw.
    progress_bar(std::string label, std::size_t total, bool quiet);
    /// Ends the line if anything was drawn (without claiming completion).
    ~progress_bar();
    progress_bar(const progress_bar&) = delete;
    progress_bar& operator=(const progress_bar&) = delete;

    /// Adds n units of done work; redraws at most every redraw_interval.
    void advance(std::size_t n = 1);
    /// Draws the full bar and ends the line (once; later calls do nothing).
    void finish();

    /// Whether this bar draws (stderr is a terminal and not quiet).
    bool drawing() const { return enabled_; }
    std::size_t done() const { return done_.load(std::memory_order_relaxed); }

    /// Minimum time between redraws.
    static constexpr std::chrono::milliseconds redraw_interval{100};

private:
    void draw(std::size_t done_units);

    std::string label_;
    std::size_t total_;
    bool enabled_;
    std::atomic<std::size_t> done_{0};
    std::atomic<std::int64_t> last_draw_ns_;
    std::atomic<bool> finished_{false};
    std::mutex draw_mutex_;
    bool drew_ = false;  // guarded by draw_mutex_
};

}  // namespace wane

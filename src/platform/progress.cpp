#include "platform/progress.hpp"

#include <unistd.h>

#include <algorithm>
#include <cstdio>

namespace wane {

namespace {

/// Characters of the bar between the brackets.
constexpr std::size_t bar_width = 30;
constexpr int percent_full = 100;

std::int64_t now_ns() {
    return std::chrono::duration_cast<std::chrono::nanoseconds>(
               std::chrono::steady_clock::now().time_since_epoch())
        .count();
}

}  // namespace

progress_bar::progress_bar(std::string label, std::size_t total, bool quiet)
    : label_(std::move(label)),
      total_(std::max<std::size_t>(total, 1)),
      enabled_(!quiet && ::isatty(STDERR_FILENO) == 1),
      // The first advance draws at once.
      last_draw_ns_(now_ns() - std::chrono::duration_cast<std::chrono::nanoseconds>(redraw_interval).count()) {}

progress_bar::~progress_bar() {
    if (!enabled_ || finished_.load()) return;
    const std::lock_guard<std::mutex> lock(draw_mutex_);
    if (drew_) std::fputc('\n', stderr);
}

void progress_bar::advance(std::size_t n) {
    const std::size_t done_units = done_.fetch_add(n, std::memory_order_relaxed) + n;
    if (!enabled_ || finished_.load(std::memory_order_relaxed)) return;
    const std::int64_t now = now_ns();
    std::int64_t last = last_draw_ns_.load(std::memory_order_relaxed);
    const std::int64_t interval_ns = std::chrono::duration_cast<std::chrono::nanoseconds>(redraw_interval).count();
    if (now - last < interval_ns) return;
    // One thread wins the right to draw this interval; the others return at once.
    if (!last_draw_ns_.compare_exchange_strong(last, now, std::memory_order_relaxed)) return;
    std::unique_lock<std::mutex> lock(draw_mutex_, std::try_to_lock);
    if (!lock.owns_lock() || finished_.load()) return;
    draw(done_units);
}

void progress_bar::finish() {
    if (finished_.exchange(true)) return;
    if (!enabled_) return;
    const std::lock_guard<std::mutex> lock(draw_mutex_);
    draw(total_);
    std::fputc('\n', stderr);
}

void progress_bar::draw(std::size_t done_units) {
    const std::size_t shown = std::min(done_units, total_);
    const std::size_t filled = shown * bar_width / total_;
    const auto percent = static_cast<int>(shown * static_cast<std::size_t>(percent_full) / total_);
    std::string bar(bar_width, ' ');
    std::fill_n(bar.begin(), filled, '#');
    // \r returns to the line start; ESC[K clears what a longer earlier line left behind.
    std::fprintf(stderr, "\r%s [%s] %3d%% (%zu/%zu)\x1b[K", label_.c_str(), bar.c_str(), percent, shown, total_);
    std::fflush(stderr);
    drew_ = true;
}

}  // namespace wane

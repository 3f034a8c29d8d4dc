// Timing helpers shared by the benchmark programs in tools/ (header only; not a program).
#pragma once

#include <time.h>

#include <algorithm>
#include <vector>

namespace wane::bench {

/// CPU time of this thread in seconds (CLOCK_THREAD_CPUTIME_ID): on a shared machine it leaves
/// out the time the thread waits for a core, so it measures one core's throughput.
inline double thread_cpu_s() {
    timespec ts{};
    clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
    return static_cast<double>(ts.tv_sec) + 1e-9 * static_cast<double>(ts.tv_nsec);
}

/// Wall-clock time in seconds (CLOCK_MONOTONIC).
inline double wall_s() {
    timespec ts{};
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return static_cast<double>(ts.tv_sec) + 1e-9 * static_cast<double>(ts.tv_nsec);
}

/// Median of the values (mean of the middle two for an even count); v must not be empty.
inline double median(std::vector<double> v) {
    std::sort(v.begin(), v.end());
    const std::size_t m = v.size() / 2;
    return v.size() % 2 ? v[m] : 0.5 * (v[m - 1] + v[m]);
}

}  // namespace wane::bench

// WANE_KERNEL_CLONES: marks a hot kernel to be compiled twice on x86-64, for AVX2 and for the
// baseline, with the clone chosen at load time (GCC/Clang target_clones). AVX2 without FMA on
// purpose: both clones then do the same IEEE operations (a multiply, then an add), bit for bit.
// Elsewhere it expands to nothing.
#pragma once

#if defined(__x86_64__) && defined(__has_attribute)
#if __has_attribute(target_clones)
#define WANE_KERNEL_CLONES __attribute__((target_clones("avx2", "default")))
#endif
#endif
#ifndef WANE_KERNEL_CLONES
#define WANE_KERNEL_CLONES
#endif

namespace wane {

/// Whether this CPU runs AVX2, asked once: the one home of the check for kernels written with
/// AVX2 intrinsics beside a baseline loop (an explicit choice where target_clones cannot make
/// the instruction wanted, e.g. a gather). False off x86-64.
inline bool cpu_has_avx2() {
#if defined(__x86_64__)
    static const bool has = [] {
        __builtin_cpu_init();
        return __builtin_cpu_supports("avx2") != 0;
    }();
    return has;
#else
    return false;
#endif
}

}  // namespace wane

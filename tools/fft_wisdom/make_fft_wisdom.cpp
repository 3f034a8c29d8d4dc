// Build-time program: plans every FFT size the analysis can ask FFTW for (spectrum/fft_planning.hpp)
// and writes each size's wisdom as a C++ table (stored_fft_wisdom_table). Planning is the costly
// part of a short FFTW run (2-4 ms per new size at FFTW_ESTIMATE, 5 sizes in one `wane analyze`);
// with the size's wisdom imported first the planner makes the same plan at once.
// Usage: make_fft_wisdom OUT.cpp
#include <fftw3.h>

#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <initializer_list>
#include <iostream>
#include <memory>
#include <string>

#include "spectrum/fft_planning.hpp"

namespace {

/// Even with no prime factor over 5 (fast_fft_size's sizes).
bool stored_size(int n) {
    if (n % 2 != 0) return false;
    for (int f : {2, 3, 5})
        while (n % f == 0) n /= f;
    return n == 1;
}

struct free_text {
    void operator()(char* p) const { std::free(p); }  // NOLINT(cppcoreguidelines-no-malloc): FFTW's string
};

/// The wisdom of one size planned alone (the planner's memory emptied first).
std::string wisdom_of(int n, bool inverse) {
    fftwf_forget_wisdom();
    float* real = fftwf_alloc_real(static_cast<std::size_t>(n));
    fftwf_complex* bins = fftwf_alloc_complex(static_cast<std::size_t>(n) / 2 + 1);
    fftwf_plan plan = inverse ? fftwf_plan_dft_c2r_1d(n, bins, real, wane::fft_planner_flags)
                              : fftwf_plan_dft_r2c_1d(n, real, bins, wane::fft_planner_flags);
    std::string out;
    if (plan != nullptr) {
        fftwf_destroy_plan(plan);
        const std::unique_ptr<char, free_text> text(fftwf_export_wisdom_to_string());
        if (text) out = text.get();
    }
    fftwf_free(real);
    fftwf_free(bins);
    return out;
}

}  // namespace

int main(int argc, char** argv) {
    if (argc != 2) {
        std::cerr << "usage: make_fft_wisdom OUT.cpp\n";
        return 2;
    }
    const std::string path = argv[1];
    const std::string partial = path + ".part";
    {
        std::ofstream out(partial);
        out << "// Made by make_fft_wisdom at build time (spectrum/fft_planning.hpp); do not edit.\n"
            << "#include \"spectrum/fft_planning.hpp\"\n\nnamespace wane {\n\nnamespace {\n\n"
            << "const stored_fft_wisdom table[] = {\n";
        int count = 0;
        for (const bool inverse : {false, true}) {
            const int last = inverse ? wane::stored_inverse_max_size : wane::stored_forward_max_size;
            for (int n = 2; n <= last; n += 2) {
                if (!stored_size(n)) continue;
                const std::string text = wisdom_of(n, inverse);
                if (text.empty() || text.find(")fftw\"") != std::string::npos) continue;
                out << "    {" << n << ", " << (inverse ? "true" : "false") << ", R\"fftw(" << text << ")fftw\"},\n";
                ++count;
            }
        }
        if (count == 0) out << "    {0, false, nullptr},\n";
        out << "};\n\n}  // namespace\n\n"
            << "std::span<const stored_fft_wisdom> stored_fft_wisdom_table() {\n"
            << "    return std::span(table).first(" << count << ");\n}\n\n}  // namespace wane\n";
        if (!out) {
            std::cerr << "make_fft_wisdom: cannot write " << partial << "\n";
            return 1;
        }
    }
    if (std::rename(partial.c_str(), path.c_str()) != 0) {
        std::cerr << "make_fft_wisdom: cannot rename " << partial << "\n";
        return 1;
    }
    fftwf_cleanup();
    return 0;
}

// The FFTW wisdom stored at build time (spectrum/fft_planning.hpp): it covers the sizes the
// analysis plans, and a size planned with it gets the plan FFTW makes with no wisdom at all (so
// the bins, and every patch, stay as they were). Run on the machine that built it, as the build's
// own tests are: wisdom from another CPU's build is refused by FFTW and not used.
#include <catch2/catch.hpp>

#include <fftw3.h>

#include <algorithm>
#include <cstdlib>
#include <memory>
#include <string>
#include <utility>

#include "spectrum/fft_planning.hpp"
#include "spectrum/stft.hpp"

using namespace wane;

namespace {

struct free_text {
    void operator()(char* p) const { std::free(p); }  // NOLINT(cppcoreguidelines-no-malloc): FFTW's string
};

/// fftwf_sprint_plan of the plan for one size (empty when none was made).
std::string plan_text(int n, bool inverse, unsigned flags) {
    float* real = fftwf_alloc_real(static_cast<std::size_t>(n));
    fftwf_complex* bins = fftwf_alloc_complex(static_cast<std::size_t>(n) / 2 + 1);
    fftwf_plan plan = inverse ? fftwf_plan_dft_c2r_1d(n, bins, real, flags) : fftwf_plan_dft_r2c_1d(n, real, bins, flags);
    std::string out;
    if (plan != nullptr) {
        const std::unique_ptr<char, free_text> text(fftwf_sprint_plan(plan));
        out = text.get();
        fftwf_destroy_plan(plan);
    }
    fftwf_free(real);
    fftwf_free(bins);
    return out;
}

const stored_fft_wisdom* find_stored(int n, bool inverse) {
    const auto table = stored_fft_wisdom_table();
    const auto it = std::find_if(table.begin(), table.end(), [&](const stored_fft_wisdom& w) {
        return w.size == n && w.inverse == inverse;
    });
    return it == table.end() ? nullptr : &*it;
}

}  // namespace

TEST_CASE("the stored wisdom is ordered by direction and size and holds every size fast_fft_size gives up to its maxima",
          "[spectrum][fft_wisdom]") {
    const auto table = stored_fft_wisdom_table();
    REQUIRE(!table.empty());
    for (std::size_t i = 1; i < table.size(); ++i) {
        CAPTURE(i, table[i].size, table[i].inverse);
        REQUIRE(std::pair(table[i - 1].inverse, table[i - 1].size) < std::pair(table[i].inverse, table[i].size));
    }
    std::size_t missing = 0;
    for (const bool inverse : {false, true}) {
        const int most = inverse ? stored_inverse_max_size : stored_forward_max_size;
        for (int asked = 2; asked <= most; asked += 97) {
            const int n = fast_fft_size(asked);
            if (n <= most && find_stored(n, inverse) == nullptr) {
                ++missing;
                UNSCOPED_INFO("no stored wisdom for " << (inverse ? "inverse" : "forward") << " size " << n);
            }
        }
    }
    CHECK(missing == 0);
}

TEST_CASE("a size planned with its stored wisdom gets the plan FFTW_ESTIMATE makes with no wisdom",
          "[spectrum][fft_wisdom]") {
    // The sizes analyses of 44.1 and 48 kHz notes plan (tracker, noise floor and attack, heard
    // spectrum; the noise render's inverse) and the ends of the stored range.
    const auto [n, inverse] = GENERATE(table<int, bool>({{2, false}, {16, false}, {400, false}, {720, false},
                                                          {5400, false}, {7290, false}, {14580, false},
                                                          {180000, false}, {354294, false}, {384000, false},
                                                          {stored_forward_max_size, false}, {2, true}, {360, true},
                                                          {1024, true}, {stored_inverse_max_size, true}}));
    CAPTURE(n, inverse);
    const stored_fft_wisdom* stored = find_stored(n, inverse);
    REQUIRE(stored != nullptr);
    // The reference: the documented FFTW_ESTIMATE planner, from an empty wisdom (nothing this
    // process planned before may lend it a choice).
    fftwf_forget_wisdom();
    const std::string plain = plan_text(n, inverse, FFTW_ESTIMATE);
    fftwf_forget_wisdom();
    REQUIRE(fftwf_import_wisdom_from_string(stored->text) == 1);
    const std::string with_wisdom = plan_text(n, inverse, fft_planner_flags);
    fftwf_forget_wisdom();
    REQUIRE(!plain.empty());
    CHECK(with_wisdom == plain);
}

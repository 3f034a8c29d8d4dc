#include "synthesis/render_budget.hpp"

#include <cmath>
#include <cstdio>
#include <stdexcept>
#include <string>

#include "core/text_format.hpp"
#include "synthesis/render.hpp"

namespace wane {

render_cost render_cost_of(const patch& p, double rate_hz, double length_s) {
    const render_params params{.sample_rate_hz = rate_hz, .length_s = length_s > 0.0 ? length_s : 0.0};
    const render_summary s = summarize_render(p, params);
    render_cost c;
    c.partials = s.partials_rendered;
    c.noise_bands = s.noise_bands_rendered;
    c.frames = s.frames;
    c.partial_samples = (static_cast<double>(c.partials) +
                         noise_band_work_partial_samples * static_cast<double>(c.noise_bands)) *
                        static_cast<double>(c.frames) * static_cast<double>(p.note.channels);
    // A stereo patch renders every channel (render_channels): twice the work and the buffer.
    c.buffer_bytes = static_cast<std::uintmax_t>(c.frames) * sizeof(float) * static_cast<std::uintmax_t>(p.note.channels);
    return c;
}

namespace {

std::string mib_text(std::uintmax_t bytes) {
    constexpr double bytes_per_mib = 1048576.0;
    return printf_text("%.0f MiB", static_cast<double>(bytes) / bytes_per_mib);
}

}  // namespace

void check_render_budget(const patch& p, double rate_hz, double length_s, const std::filesystem::path& patch_path,
                         double budget_partial_samples) {
    if (!(rate_hz > 0.0 && std::isfinite(rate_hz)) || !std::isfinite(length_s)) {
        throw std::invalid_argument("check_render_budget: rate and length must be finite, rate above 0");
    }
    const render_cost c = render_cost_of(p, rate_hz, length_s);
    const bool too_much_work = c.partial_samples > budget_partial_samples;
    const bool too_much_memory = c.buffer_bytes > max_render_buffer_bytes;
    if (!too_much_work && !too_much_memory) return;
    const double seconds = static_cast<double>(c.frames) / rate_hz;
    std::string text;
    if (too_much_work) {
        text = printf_text("render refused: (%zu partials + %zu noise bands x %.0f) x %.4g s x %.0f Hz = %.3g "
                           "partial-samples of work, over the budget of %.3g (--max-work raises it; the output buffer "
                           "would take %s); shorten the render, lower the rate or keep fewer partials",
                           c.partials, c.noise_bands, noise_band_work_partial_samples, seconds, rate_hz, c.partial_samples,
                           budget_partial_samples, mib_text(c.buffer_bytes).c_str());
    } else {
        text = printf_text("render refused: %.4g s x %.0f Hz = %zu frames, the output buffer would take %s, over the "
                      "%s limit; shorten the render or lower the rate",
                      seconds, rate_hz, c.frames, mib_text(c.buffer_bytes).c_str(),
                      mib_text(max_render_buffer_bytes).c_str());
    }
    const std::string where = patch_path.empty() ? std::string() : patch_path.string() + ": ";
    throw std::runtime_error(where + text);
}

}  // namespace wane

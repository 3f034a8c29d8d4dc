// wane: analyze a recorded note into a patch of damped partials, and render audio from patches.
#include <cstdio>
#include <exception>
#include <iostream>
#include <string>

#include "cli/common.hpp"
#include "core/analysis_error.hpp"
#include "io/atomic_file.hpp"
#include "platform/interrupt_cleanup.hpp"
#include "platform/memory_reuse.hpp"

namespace wane::cli {

global_flags& globals() {
    static global_flags flags;
    return flags;
}

std::string printable(std::string_view text) {
    constexpr unsigned char space = 0x20;
    constexpr unsigned char del = 0x7f;
    constexpr unsigned char utf8_c1_lead = 0xc2;  // U+0080..U+009F are C2 80..C2 9F in UTF-8
    constexpr unsigned char c1_first = 0x80;
    constexpr unsigned char c1_last = 0x9f;
    std::string out;
    out.reserve(text.size());
    char buf[8];
    for (std::size_t i = 0; i < text.size(); ++i) {
        const auto c = static_cast<unsigned char>(text[i]);
        if (c < space || c == del) {
            std::snprintf(buf, sizeof buf, "\\x%02x", c);
            out += buf;
        } else if (c == utf8_c1_lead && i + 1 < text.size() && static_cast<unsigned char>(text[i + 1]) >= c1_first &&
                   static_cast<unsigned char>(text[i + 1]) <= c1_last) {
            std::snprintf(buf, sizeof buf, "\\u%04x", static_cast<unsigned char>(text[i + 1]));
            out += buf;
            ++i;
        } else {
            out += static_cast<char>(c);
        }
    }
    return out;
}

void warn(std::string_view msg) { std::cerr << "wane: warning: " << printable(msg) << '\n'; }
void print_error(std::string_view msg) { std::cerr << "wane: error: " << printable(msg) << '\n'; }

void warn_all(const std::vector<std::string>& warnings) {
    for (std::size_t i = 0; i < warnings.size() && i < max_warnings_shown; ++i) warn(warnings[i]);
    if (warnings.size() > max_warnings_shown) {
        warn("... and " + std::to_string(warnings.size() - max_warnings_shown) + " more warnings (" +
             std::to_string(warnings.size()) + " in all), not shown");
    }
}
std::string short_num(double v) {
    char buf[32];
    std::snprintf(buf, sizeof buf, "%.6g", v);
    return buf;
}

void say(std::string_view msg) {
    if (!globals().quiet) std::cout << printable(msg) << '\n';
}

}  // namespace wane::cli

namespace {

int run_main(int argc, char** argv) {
    using namespace wane::cli;
    wane::keep_freed_memory_for_reuse();
    wane::back_heap_with_huge_pages();
    wane::install_interrupt_cleanup();
    CLI::App app{"wane: analyze a plucked or struck note into an editable patch of damped partials, "
                 "and render faithful copies and variants from it.",
                 "wane"};
    app.set_version_flag("--version", std::string("wane ") + WANE_VERSION);
    app.add_flag("-q,--quiet", globals().quiet, "No progress bars or summaries (warnings still shown)");
    app.require_subcommand(1);
    app.fallthrough();  // global options (-q) also after the subcommand
    app.footer("Examples:\n  wane analyze note.wav -o note.toml\n  wane render note.toml -o copy.wav\n"
               "Run 'wane COMMAND --help' for each command's options.");

    command_registry reg;
    add_analyze_command(app, reg);
    add_render_command(app, reg);
    add_info_command(app, reg);
    add_edit_command(app, reg);
    add_blend_command(app, reg);
    add_keymap_command(app, reg);
    add_compare_command(app, reg);
    add_report_command(app, reg);

    try {
        app.parse(argc, argv);
    } catch (const CLI::CallForHelp& e) {
        return app.exit(e);
    } catch (const CLI::CallForAllHelp& e) {
        return app.exit(e);
    } catch (const CLI::CallForVersion& e) {
        return app.exit(e);
    } catch (const CLI::ParseError& e) {
        print_error(std::string(e.what()) + " (see wane --help)");  // one line, like every error
        return exit_usage;
    }

    try {
        for (auto& [sub, run] : reg.commands) {
            if (sub->parsed()) return run();
        }
        print_error("no command given");
        return exit_usage;
    } catch (const usage_error& e) {
        print_error(e.what());
        return exit_usage;
    } catch (const wane::analysis_error& e) {
        // A sound the analysis cannot work on: a run-time failure (the command named the file).
        print_error(e.what());
        return exit_failure;
    } catch (const std::exception& e) {
        print_error(e.what());
        return exit_failure;
    }
}

}  // namespace

int main(int argc, char** argv) {
    try {
        return run_main(argc, argv);
    } catch (const std::exception& e) {
        wane::cli::print_error(e.what());
    } catch (...) {
        wane::cli::print_error("unexpected failure");
    }
    return wane::cli::exit_failure;
}

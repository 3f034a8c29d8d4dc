// wane report: placeholder until its issue lands; refuses to run rather than pretend.
#include "cli/common.hpp"

namespace wane::cli {

void add_report_command(CLI::App& app, command_registry& reg) {
    CLI::App* sub = app.add_subcommand("report", "(not built yet)");
    sub->allow_extras();
    reg.add(sub, [] {
        print_error("'report' is not built yet");
        return exit_failure;
    });
}

}  // namespace wane::cli

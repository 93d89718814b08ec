// pftgw: the command line. Each subcommand lives in its own file (commands.hpp).
#include <CLI/CLI.hpp>

#include "gateway/cli/commands.hpp"

int main(int argc, char** argv) {
    using namespace pftgw::cli;
    CLI::App app{
        "pftgw: results gateway for lung-function laboratories.\n"
        "It moves and checks results; it does not diagnose. Interpretation belongs to\n"
        "licensed staff and local rules."};
    app.require_subcommand(1);
    app.set_version_flag("--version", "pftgw 0.1.0");
    CommandContext ctx;
    add_convert_command(app, ctx);
    add_check_command(app, ctx);
    add_quantities_command(app, ctx);
    add_reference_command(app, ctx);
    try {
        app.parse(argc, argv);
    } catch (const CLI::ParseError& e) {
        const int rc = app.exit(e);
        return rc == 0 ? kExitOk : kExitUsage;
    }
    return ctx.exit_code;
}

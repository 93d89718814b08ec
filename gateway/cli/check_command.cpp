// pftgw check (not built yet).
#include "gateway/cli/commands.hpp"

namespace pftgw::cli {

void add_check_command(CLI::App& app, CommandContext& ctx) {
    auto* sub = app.add_subcommand("check", "not built yet");
    sub->callback([&ctx] { ctx.exit_code = kExitUsage; });
}

}  // namespace pftgw::cli

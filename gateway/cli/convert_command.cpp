// pftgw convert (not built yet).
#include "gateway/cli/commands.hpp"

namespace pftgw::cli {

void add_convert_command(CLI::App& app, CommandContext& ctx) {
    auto* sub = app.add_subcommand("convert", "not built yet");
    sub->callback([&ctx] { ctx.exit_code = kExitUsage; });
}

}  // namespace pftgw::cli

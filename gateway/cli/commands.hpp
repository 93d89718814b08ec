// The subcommands of pftgw. Each file adds one subcommand to the app; its
// callback stores the exit status (DECISIONS.md: 0 good, 1 findings of
// severity error or blocked results, 2 usage or configuration, 3 unreadable input).
#pragma once

#include <CLI/CLI.hpp>

namespace pftgw::cli {

inline constexpr int kExitOk = 0;
inline constexpr int kExitFindings = 1;
inline constexpr int kExitUsage = 2;
inline constexpr int kExitUnreadable = 3;

struct CommandContext {
    int exit_code = kExitOk;
};

void add_convert_command(CLI::App& app, CommandContext& ctx);     // convert_command.cpp
void add_check_command(CLI::App& app, CommandContext& ctx);       // check_command.cpp
void add_quantities_command(CLI::App& app, CommandContext& ctx);  // quantities_command.cpp
void add_reference_command(CLI::App& app, CommandContext& ctx);   // reference_command.cpp

}  // namespace pftgw::cli

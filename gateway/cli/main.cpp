// pftgw: the command line. Subcommands live in their own files.
#include <CLI/CLI.hpp>

int main(int argc, char** argv) {
    CLI::App app{"pftgw: results gateway for lung-function laboratories"};
    app.require_subcommand(1);
    CLI11_PARSE(app, argc, argv);
    return 0;
}

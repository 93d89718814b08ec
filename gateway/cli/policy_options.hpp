// The reference-value policy options `convert` and `check` share.
#pragma once

#include <CLI/CLI.hpp>
#include <string>

#include "gateway/cli/inputs.hpp"
#include "gateway/core/reference/reference_values.hpp"

namespace pftgw::cli {

struct PolicyOptions {
    std::string reference = "none";  // none | fill | both
    std::string spirometry_set = "gli-global-2022";
    std::string gli2012_group;  // empty: from the subject's ethnicity
};

void add_policy_options(CLI::App& sub, PolicyOptions& o);

// --from and --profile.
struct InputOptions {
    std::string from = "neutral";  // neutral | hl7v2 | astm | csv
    std::string profile;           // device profile file (TOML)
};
void add_input_options(CLI::App& sub, InputOptions& o);

// Loads the profile (every error printed with file, line and key) and fills
// `context`; `storage` keeps the profile alive. False: a usage error (exit 2).
bool make_input_context(const InputOptions& o, InputContext& context,
                        std::optional<DeviceProfile>& storage, const char* command);

// Fills `policy`; on a bad value prints what is expected and returns false.
bool parse_policy(const PolicyOptions& o, ReferencePolicy& policy, const char* command);

}  // namespace pftgw::cli

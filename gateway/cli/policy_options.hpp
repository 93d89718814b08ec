// The reference-value policy options `convert` and `check` share.
#pragma once

#include <CLI/CLI.hpp>
#include <string>

#include "gateway/core/reference/reference_values.hpp"

namespace pftgw::cli {

struct PolicyOptions {
    std::string reference = "none";  // none | fill | both
    std::string spirometry_set = "gli-global-2022";
    std::string gli2012_group;  // empty: from the subject's ethnicity
};

void add_policy_options(CLI::App& sub, PolicyOptions& o);

// Fills `policy`; on a bad value prints what is expected and returns false.
bool parse_policy(const PolicyOptions& o, ReferencePolicy& policy, const char* command);

}  // namespace pftgw::cli

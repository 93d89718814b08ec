// See policy_options.hpp.
#include "gateway/cli/policy_options.hpp"

#include <fmt/core.h>

namespace pftgw::cli {

void add_policy_options(CLI::App& sub, PolicyOptions& o) {
    sub.add_option("--reference", o.reference,
                   "GLI reference values: none (keep the device's), fill (compute where the device "
                   "sent none) or both (compute and keep the device's beside them)")
        ->capture_default_str();
    sub.add_option("--spirometry-equations", o.spirometry_set,
                   "Spirometry set for --reference: gli-global-2022 or gli-2012 (lung volumes use "
                   "GLI-2021; DLCO, KCO, VA GLI-2017)")
        ->capture_default_str();
    sub.add_option("--gli-2012-group", o.gli2012_group,
                   "GLI-2012 group: caucasian, african-american, ne-asian, se-asian, other "
                   "(default: from the subject's ethnicity)");
}

bool parse_policy(const PolicyOptions& o, ReferencePolicy& policy, const char* command) {
    auto mode = parse_reference_mode(o.reference);
    if (!mode) {
        fmt::print(stderr, "pftgw {}: --reference must be none, fill or both, not '{}'\n", command,
                   o.reference);
        return false;
    }
    policy.mode = *mode;
    auto set = parse_equation_set(o.spirometry_set);
    if (!set || (*set != EquationSet::gli_global_2022 && *set != EquationSet::gli_2012)) {
        fmt::print(
            stderr,
            "pftgw {}: --spirometry-equations must be gli-global-2022 or gli-2012, not '{}'\n",
            command, o.spirometry_set);
        return false;
    }
    policy.spirometry_set = *set;
    if (!o.gli2012_group.empty()) {
        auto group = parse_gli2012_group(o.gli2012_group);
        if (!group) {
            fmt::print(stderr, "pftgw {}: --gli-2012-group '{}' is not a GLI-2012 group\n", command,
                       o.gli2012_group);
            return false;
        }
        policy.gli2012_group = *group;
    }
    return true;
}

}  // namespace pftgw::cli

// See policy_options.hpp.
#include "gateway/cli/policy_options.hpp"

#include <fmt/core.h>

#include "adapters/profile/profile_loader.hpp"

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

void add_input_options(CLI::App& sub, InputOptions& o) {
    sub.add_option("--from", o.from,
                   "Input dialect: neutral (XML, JSON, JSON Lines), hl7v2 (ORU from devices), astm "
                   "(E1394 records, raw or E1381-framed), csv (archive exports)")
        ->capture_default_str();
    sub.add_option("--profile", o.profile,
                   "Device profile (TOML, schemas/device-profile.md): the device's codes, units, "
                   "conditions, time zone; required for astm and csv");
}

bool make_input_context(const InputOptions& o, InputContext& context,
                        std::optional<DeviceProfile>& storage, const char* command) {
    auto from = parse_input_format(o.from);
    if (!from) {
        fmt::print(stderr, "pftgw {}: --from must be neutral, hl7v2, astm or csv, not '{}'\n",
                   command, o.from);
        return false;
    }
    context.from = *from;
    if (o.profile.empty()) {
        // HL7 without a profile maps no code: `check` then lists every code a
        // device sends (a start for writing its profile); `convert` would
        // only block every result.
        if (*from == InputFormat::hl7v2 && std::string_view(command) == "convert") {
            fmt::print(
                stderr,
                "pftgw convert: --from hl7v2 needs --profile FILE (which code means which "
                "quantity); `pftgw check --from hl7v2 FILE` lists the codes a device sends\n");
            return false;
        }
        if (*from == InputFormat::astm || *from == InputFormat::csv) {
            fmt::print(
                stderr,
                "pftgw {}: --from {} needs --profile FILE (which code means which quantity)\n",
                command, o.from);
            return false;
        }
        return true;
    }
    auto loaded = profile::load_profile_file(o.profile);
    if (!loaded.ok()) {
        for (const auto& e : loaded.errors)
            fmt::print(stderr, "pftgw {}: {}\n", command, e.to_string());
        return false;
    }
    storage = std::move(loaded.profile);
    context.profile = &*storage;
    if ((*from == InputFormat::csv) && !storage->csv) {
        fmt::print(stderr, "pftgw {}: profile {} has no CSV layout ([csv] table) for --from csv\n",
                   command, o.profile);
        return false;
    }
    return true;
}

}  // namespace pftgw::cli

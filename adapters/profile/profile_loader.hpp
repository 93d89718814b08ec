// Loads a device profile (gateway/core/device_profile.hpp) from a TOML file
// and validates it against the quantity table as it loads. The format is
// documented in schemas/device-profile.md; every key the loader knows is in
// profile_keys(). Errors are values: each names the file, the line and the key.
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "gateway/core/device_profile.hpp"

namespace pftgw::profile {

// One thing wrong with a profile file.
struct ProfileError {
    std::string file;     // as given to the loader
    int line = 0;         // 1-based; 0 when the file could not be read at all
    std::string key;      // dotted path of the key, e.g. "codes[2].kind"; empty for syntax errors
    std::string rule;     // stable id, e.g. "profile.unknown-key"
    std::string message;  // what was seen and what was expected
    // "file:line: key: message"
    std::string to_string() const;
};

struct ProfileOutcome {
    std::optional<DeviceProfile> profile;  // set only when there are no errors
    std::vector<ProfileError> errors;
    bool ok() const { return profile.has_value() && errors.empty(); }
};

// Parses profile text; `source_name` names it in errors and becomes
// DeviceProfile::source_file.
ProfileOutcome parse_profile(std::string_view toml_text, std::string_view source_name);

// Reads and parses a profile file.
ProfileOutcome load_profile_file(const std::string& path);

// The key table: every key a profile may hold, with its TOML type and default.
// It drives the unknown-key check and a test that the documentation lists
// every key.
struct ProfileKey {
    std::string_view table;  // "" for the top level, "device", "units", "codes", ...
    std::string_view key;
    std::string_view type;  // "string", "integer", "boolean", "table", "array of tables"
    std::string_view default_value;
};
const std::vector<ProfileKey>& profile_keys();

// True when `name` has the form of an IANA time-zone name ("Europe/Oslo",
// "UTC", "America/Argentina/Buenos_Aires", "Etc/GMT+1"). Only the form is
// checked; whether the zone exists is the resolver's business.
bool is_time_zone_form(std::string_view name);

}  // namespace pftgw::profile

// Test support for the HL7 v2 reader tests: an invented device profile and an
// offset resolver backed by the system tzdata through glibc (an outside
// reference for local times: IANA zone rules, not the project's code).
#pragma once

#include <cstdlib>
#include <ctime>
#include <string>
#include <string_view>

#include "adapters/hl7v2/oru_reader.hpp"
#include "gateway/core/device_profile.hpp"

namespace pftgw::hl7v2::testing {

// Invented device "Brackenfield SpiroLine 4"; codes of its own.
inline DeviceProfile spiroline_profile() {
    DeviceProfile p;
    p.name = "brackenfield-spiroline-4";
    p.code_system = "Brackenfield SpiroLine";
    p.device.manufacturer = "Brackenfield";
    p.device.model = "SpiroLine 4";
    p.time_zone = "Europe/Oslo";
    p.equation_set = "GLI-2012";
    p.patient_identifier_system = "urn:oid:2.999.1.7";
    CodeMapping fev1;
    fev1.code = "F1";
    fev1.kind = "FEV1";
    fev1.condition = GasCondition::btps;
    p.codes.push_back(fev1);
    CodeMapping fvc;
    fvc.code = "FVC";
    fvc.kind = "FVC";
    fvc.condition = GasCondition::btps;
    p.codes.push_back(fvc);
    CodeMapping pred;
    pred.code = "F1P";
    pred.kind = "FEV1.pred";
    p.codes.push_back(pred);
    CodeMapping z;
    z.code = "F1Z";
    z.kind = "FEV1.z";
    p.codes.push_back(z);
    // Diffusing capacity sent as "ml/min/mmHg" (not UCUM): the profile settles it.
    CodeMapping dlco;
    dlco.code = "DL";
    dlco.kind = "DLCO";
    dlco.unit = "mL/min/mm[Hg]";
    dlco.override_sent = true;
    p.codes.push_back(dlco);
    // Volumes labelled BTPS by the device but really ATPS.
    CodeMapping vi;
    vi.code = "VIN";
    vi.kind = "VI";
    vi.condition = GasCondition::atps;
    vi.override_sent = true;
    vi.trial_value = true;
    p.codes.push_back(vi);
    // Only this coding system's "PF" is PEF ("code^^system" form).
    CodeMapping pef;
    pef.code = "PF^^99BRK";
    pef.kind = "PEF";
    pef.unit = "L/s";
    pef.condition = GasCondition::btps;
    p.codes.push_back(pef);
    CodeMapping height;
    height.code = "HT";
    height.kind = "HEIGHT";
    p.codes.push_back(height);
    return p;
}

// UTC offset of a local time in an IANA zone, from the system tzdata via
// glibc mktime (TZ set for the call). Tests run single-threaded.
inline std::optional<int> tzdata_offset(const std::string& zone, const LocalDateTime& local) {
    const char* old = std::getenv("TZ");
    const std::string saved = old ? old : "";
    setenv("TZ", zone.c_str(), 1);
    tzset();
    std::tm tm{};
    tm.tm_year = local.date.year - 1900;
    tm.tm_mon = local.date.month - 1;
    tm.tm_mday = local.date.day;
    tm.tm_hour = local.hour;
    tm.tm_min = local.minute;
    tm.tm_sec = local.second;
    tm.tm_isdst = -1;
    const std::time_t t = std::mktime(&tm);
    const long gmtoff = tm.tm_gmtoff;
    if (old)
        setenv("TZ", saved.c_str(), 1);
    else
        unsetenv("TZ");
    tzset();
    if (t == static_cast<std::time_t>(-1)) return std::nullopt;
    return static_cast<int>(gmtoff / 60);
}

inline Hl7ReadOutcome read(std::string_view bytes, const DeviceProfile& profile,
                           OffsetResolver resolver = &tzdata_offset) {
    Hl7ReadOptions o;
    o.profile = &profile;
    o.resolve_offset = resolver;
    return read_hl7(bytes, o);
}

inline bool has_rule(const std::vector<Finding>& findings, std::string_view rule) {
    for (const auto& f : findings)
        if (f.rule == rule) return true;
    return false;
}

inline std::string value_of(const Finding& f, std::string_view name) {
    for (const auto& [n, v] : f.values)
        if (n == name) return v;
    return {};
}

}  // namespace pftgw::hl7v2::testing

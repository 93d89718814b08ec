// Names of the neutral model's enumerations, as the schema spells them.
#include "gateway/core/model.hpp"

#include <algorithm>
#include <array>
#include <cctype>

namespace pftgw {
namespace {

bool iequals(std::string_view a, std::string_view b) {
    return a.size() == b.size() && std::equal(a.begin(), a.end(), b.begin(), [](char x, char y) {
               return std::tolower(static_cast<unsigned char>(x)) ==
                      std::tolower(static_cast<unsigned char>(y));
           });
}

template <class E, std::size_t N>
std::optional<E> parse_named(std::string_view text,
                             const std::array<std::pair<E, std::string_view>, N>& names) {
    for (const auto& [value, name] : names)
        if (iequals(text, name)) return value;
    return std::nullopt;
}

template <class E, std::size_t N>
std::string_view name_of(E value, const std::array<std::pair<E, std::string_view>, N>& names) {
    for (const auto& [v, name] : names)
        if (v == value) return name;
    return {};
}

constexpr std::array<std::pair<GasCondition, std::string_view>, 6> kConditions{{
    {GasCondition::btps, "BTPS"},
    {GasCondition::stpd, "STPD"},
    {GasCondition::atps, "ATPS"},
    {GasCondition::atpd, "ATPD"},
    {GasCondition::none, "none"},
    {GasCondition::unspecified, ""},
}};
constexpr std::array<std::pair<Origin, std::string_view>, 2> kOrigins{{
    {Origin::device, "device"},
    {Origin::gateway, "gateway"},
}};
constexpr std::array<std::pair<SexAtBirth, std::string_view>, 3> kSexes{{
    {SexAtBirth::male, "male"},
    {SexAtBirth::female, "female"},
    {SexAtBirth::unknown, "unknown"},
}};
constexpr std::array<std::pair<TestType, std::string_view>, 3> kTests{{
    {TestType::spirometry, "spirometry"},
    {TestType::lung_volumes, "lung-volumes"},
    {TestType::diffusing_capacity, "diffusing-capacity"},
}};
constexpr std::array<std::pair<Severity, std::string_view>, 3> kSeverities{{
    {Severity::info, "info"},
    {Severity::warning, "warning"},
    {Severity::error, "error"},
}};
constexpr std::array<std::pair<ResultStatus, std::string_view>, 3> kStatuses{{
    {ResultStatus::final, "final"},
    {ResultStatus::preliminary, "preliminary"},
    {ResultStatus::corrected, "corrected"},
}};

}  // namespace

std::string_view to_string(GasCondition c) {
    return name_of(c, kConditions);
}
std::optional<GasCondition> parse_gas_condition(std::string_view t) {
    if (t.empty()) return std::nullopt;
    return parse_named(t, kConditions);
}
std::string_view to_string(Origin o) {
    return name_of(o, kOrigins);
}
std::optional<Origin> parse_origin(std::string_view t) {
    return parse_named(t, kOrigins);
}
std::string_view to_string(SexAtBirth s) {
    return name_of(s, kSexes);
}
std::optional<SexAtBirth> parse_sex_at_birth(std::string_view t) {
    return parse_named(t, kSexes);
}
std::string_view to_string(TestType t) {
    return name_of(t, kTests);
}
std::optional<TestType> parse_test_type(std::string_view t) {
    return parse_named(t, kTests);
}
std::string_view to_string(Severity s) {
    return name_of(s, kSeverities);
}
std::optional<Severity> parse_severity(std::string_view t) {
    return parse_named(t, kSeverities);
}
std::string_view to_string(ResultStatus s) {
    return name_of(s, kStatuses);
}
std::optional<ResultStatus> parse_result_status(std::string_view t) {
    return parse_named(t, kStatuses);
}

const Quantity* Test::find(std::string_view kind) const {
    for (const auto& q : values)
        if (q.kind == kind) return &q;
    return nullptr;
}
Quantity* Test::find(std::string_view kind) {
    for (auto& q : values)
        if (q.kind == kind) return &q;
    return nullptr;
}

const Test* NeutralResult::find_test(TestType type) const {
    for (const auto& t : tests)
        if (t.type == type) return &t;
    return nullptr;
}
Test* NeutralResult::find_test(TestType type) {
    for (auto& t : tests)
        if (t.type == type) return &t;
    return nullptr;
}

bool has_errors(const std::vector<Finding>& findings) {
    return std::any_of(findings.begin(), findings.end(),
                       [](const Finding& f) { return f.severity == Severity::error; });
}

bool info_travels_to_record(const Finding& f) {
    const std::string_view rule = f.rule;
    if (!rule.starts_with("quality.") && !rule.starts_with("adjust.")) return false;
    return !rule.ends_with(".not-assessed") && !rule.ends_with(".not-graded");
}

}  // namespace pftgw

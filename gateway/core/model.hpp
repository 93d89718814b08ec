// The neutral result: one session of one person on one device.
// Plain data. Every reader produces it, every writer consumes it; the XSD and
// JSON Schema in schemas/ describe the same model (DEVELOPERS.md, "The neutral model").
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "gateway/core/time.hpp"

namespace pftgw {

// Gas condition of a volume or flow. `unspecified` means the source said
// nothing; `none` means the quantity is not a gas volume (a time, a ratio).
enum class GasCondition { unspecified, none, btps, stpd, atps, atpd };

std::string_view to_string(GasCondition c);  // "BTPS", "STPD", "ATPS", "ATPD", "none", ""
std::optional<GasCondition> parse_gas_condition(std::string_view text);  // case-insensitive

// Who produced a number: the device sent it, or the gateway computed it.
enum class Origin { device, gateway };
std::string_view to_string(Origin o);  // "device", "gateway"
std::optional<Origin> parse_origin(std::string_view text);

// Exactly what the source sent, before any mapping or conversion.
struct SourceForm {
    std::string value_text;      // "3,21" exactly as sent
    std::string unit_text;       // "ml" exactly as sent
    std::string condition_text;  // "ATPS" exactly as sent
    std::string code;            // the device's own test code, e.g. "FEV1_BEST"
    std::string code_system;     // whose code it is (profile or device name)
    bool operator==(const SourceForm&) const = default;
};

// How the gateway reached the value it holds from what was sent.
struct Derivation {
    double factor = 1.0;                    // value = sent number x factor
    std::string steps;                      // human-readable, e.g. "mL->L; ATPS->BTPS"
    std::optional<double> temperature_cel;  // ambient temperature used, if any
    std::optional<double> pressure_kpa;     // barometric pressure used, if any
    std::string water_vapour_equation;      // e.g. "Buck 1996", when one was used
    bool operator==(const Derivation&) const = default;
};

// Predicted / LLN / ULN / z / percent predicted from one named equation set.
// predicted, lln and uln are in `unit` at the kind's canonical condition:
// reference equations are defined at BTPS (volumes, flows) or STPD (DLCO),
// so a device that reports FEV1 at ATPS still sends its predicted FEV1 at BTPS.
struct ReferenceValues {
    std::string equation_set;      // "GLI-2017", "GLI Global 2022", or a device's own label
    std::string equation_version;  // e.g. "2020 correction"; may be empty
    Origin origin = Origin::device;
    std::string unit;  // UCUM unit of predicted/lln/uln; empty: the quantity's own unit as sent
    std::optional<double> predicted;
    std::optional<double> lln;
    std::optional<double> uln;
    std::optional<double> z_score;
    std::optional<double> percent_predicted;
    bool operator==(const ReferenceValues&) const = default;
};

// Every number in a result is a Quantity.
struct Quantity {
    std::string kind;             // key in schemas/quantities.csv, e.g. "FEV1"
    std::optional<double> value;  // in `unit` at `condition`; empty when absent
    std::string unit;             // UCUM
    GasCondition condition = GasCondition::unspecified;
    Origin origin = Origin::device;
    SourceForm source;                         // what was sent
    std::optional<Derivation> derivation;      // set once normalized
    std::optional<std::string> absent_reason;  // explicit "not measured": never a 0
    std::vector<ReferenceValues> reference;
    std::vector<int> trials;                // trial numbers the reported value came from
    std::vector<std::string> derived_from;  // kinds it was computed from (KCO <- DLCO, VA)
    // Free text about this value alone (an ASTM C record after its R record,
    // an HL7 NTE after its OBX); comments on the whole test are Test::comments.
    std::vector<std::string> comments;
    bool operator==(const Quantity&) const = default;
};

struct Identifier {
    std::string system;  // assigning authority as a URI or OID ("urn:oid:...")
    std::string value;
    std::string type;  // HL7 table 0203 code when known: MR, PI, ...
    bool operator==(const Identifier&) const = default;
};

enum class SexAtBirth { unknown, male, female };
std::string_view to_string(SexAtBirth s);  // "male", "female", "unknown"
std::optional<SexAtBirth> parse_sex_at_birth(std::string_view text);

struct Subject {
    std::vector<Identifier> identifiers;
    std::string family_name;
    std::string given_name;
    SexAtBirth sex_at_birth = SexAtBirth::unknown;  // what reference equations need
    std::string administrative_gender;              // as the record has it; may be empty
    std::optional<Date> birth_date;
    std::optional<Quantity> height;  // kind HEIGHT
    std::optional<Quantity> weight;  // kind WEIGHT
    std::string ethnicity;           // only where a reference set needs it (GLI-2012 group)
    bool operator==(const Subject&) const = default;
};

struct Order {
    std::string placer_number;
    std::string filler_number;
    std::string accession_number;
    bool operator==(const Order&) const = default;
};

struct Device {
    std::string id;  // stable identity of the instrument within the site
    std::string manufacturer;
    std::string model;
    std::string serial_number;
    std::string software_version;
    std::optional<Timestamp> last_calibration;
    std::string calibration_note;
    bool operator==(const Device&) const = default;
};

struct Environment {
    std::optional<Quantity> temperature;  // kind AMB_TEMP
    std::optional<Quantity> pressure;     // kind PB
    std::optional<Quantity> humidity;     // kind RH
    bool operator==(const Environment&) const = default;
};

enum class TestType { spirometry, lung_volumes, diffusing_capacity };
std::string_view to_string(TestType t);  // "spirometry", "lung-volumes", "diffusing-capacity"
std::optional<TestType> parse_test_type(std::string_view text);

// One maneuver a reported value may have been chosen from.
struct Trial {
    int number = 0;
    std::optional<Timestamp> time;
    std::optional<bool> operator_accepted;
    std::vector<Quantity> values;
    std::string tracer;  // DLCO tracer gas: "helium", "methane", "neon"; empty if none
    bool operator==(const Trial&) const = default;
};

struct Test {
    TestType type = TestType::spirometry;
    std::string method;  // e.g. "body-plethysmography", "nitrogen-washout", "single-breath"
    std::optional<Timestamp> time;
    std::vector<Quantity> values;  // reported values
    std::vector<Trial> trials;
    std::vector<std::string> comments;
    bool operator==(const Test&) const = default;

    const Quantity* find(std::string_view kind) const;
    Quantity* find(std::string_view kind);
};

enum class Severity { info, warning, error };
std::string_view to_string(Severity s);  // "info", "warning", "error"
std::optional<Severity> parse_severity(std::string_view text);

// A finding: which rule, how bad, where, what was seen and what was expected.
struct Finding {
    std::string rule;  // e.g. "unit.unknown"
    Severity severity = Severity::warning;
    std::string path;  // e.g. "tests[0].values[FEV1].unit"
    std::string message;
    std::vector<std::pair<std::string, std::string>> values;  // the values that triggered it
    bool operator==(const Finding&) const = default;
};

// Vendor data the schema does not model, kept so nothing a device sent is lost.
// One level: an element in the vendor's namespace with named text properties.
struct Extension {
    std::string namespace_uri;
    std::string name;
    std::vector<std::pair<std::string, std::string>> properties;
    bool operator==(const Extension&) const = default;
};

enum class ResultStatus { final, preliminary, corrected };
std::string_view to_string(ResultStatus s);  // "final", "preliminary", "corrected"
std::optional<ResultStatus> parse_result_status(std::string_view text);

struct NeutralResult {
    std::string schema_version = "1.2";
    std::string id;    // stable identifier (identity.hpp); derived when empty
    int revision = 1;  // a correction from the device is the next revision
    ResultStatus status = ResultStatus::final;
    std::string replaces;               // id of another result this one supersedes, if any
    std::string device_session_number;  // the device's own session or test number
    std::optional<Timestamp> session_time;
    Subject subject;
    Order order;
    Device device;
    Environment environment;
    std::vector<Test> tests;
    std::vector<Finding> findings;
    std::vector<Extension> extensions;
    bool operator==(const NeutralResult&) const = default;

    const Test* find_test(TestType type) const;
    Test* find_test(TestType type);
};

bool has_errors(const std::vector<Finding>& findings);

// Whether an info finding goes out with the result to the record: the
// physiology grades, acceptability, repeatability (quality.*) and adjustments
// (adjust.*); not the notes that something could not be assessed, which are
// for `pftgw check` only. Warnings always travel; errors block delivery.
bool info_travels_to_record(const Finding& f);

}  // namespace pftgw

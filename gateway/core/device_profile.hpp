// A device profile: what one device model's codes, units, gas conditions,
// times, character set and decimal separator really are. Readers of device
// dialects (ASTM E1394, HL7 v2 from devices, CSV) map through it; they never
// guess. Plain data: loading it from a file is adapters/profile's job.
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "gateway/core/model.hpp"

namespace pftgw {

// One device code and what it means.
struct CodeMapping {
    std::string
        code;  // the device's own code, e.g. "F1" (ASTM R-3 local code, HL7 OBX-3.1, CSV column)
    std::string kind;  // quantity kind key in schemas/quantities.csv, e.g. "FEV1" or "FEV1.pred"
    std::optional<TestType>
        test;  // which test it belongs to; default: the kind's test in the table
    // Unit and condition the device really uses. Applied when the device sends
    // none; when `override_sent` is true they replace what it sends (a device
    // known to label ATPS volumes "BTPS", for example). What was sent is still
    // kept in Quantity::source.
    std::string unit;
    std::optional<GasCondition> condition;
    bool override_sent = false;
    bool trial_value = false;  // a per-maneuver value (goes into Trial::values)
};

// How a CSV export is laid out (issue 3: one row per session, or one row per value).
struct CsvColumn {
    std::string column;  // header name
    std::string target;  // what the column holds: a quantity kind, or a field such as
                         // "subject.identifier", "subject.family_name", "session_time", "device.id"
    std::string unit;    // for quantity columns
    std::optional<GasCondition> condition;
};
struct CsvLayout {
    enum class Shape { row_per_session, row_per_value } shape = Shape::row_per_session;
    char separator = ',';
    char quote = '"';
    bool has_header = true;
    std::vector<CsvColumn> columns;
    // row_per_value: the columns holding the session key, the code, the value, the unit.
    std::string session_column;
    std::string code_column;
    std::string value_column;
    std::string unit_column;
};

// A device's spelling of a unit and the UCUM unit it means ("ml" -> "mL").
// Readers put the UCUM form in Quantity::unit and keep the spelling in
// SourceForm::unit_text.
struct UnitAlias {
    std::string sent;
    std::string ucum;
};

// A value a device sends inside a comment record rather than a result record
// (ambient temperature and pressure in an ASTM C record, for example). The
// comment text's first component is `tag`; component `component` (1-based)
// holds the value, which is then read as the device code `code` (mapped
// through DeviceProfile::codes). `unit_component` (0: none) holds its unit.
struct CommentValue {
    std::string tag;
    int component = 2;
    std::string code;
    int unit_component = 0;
};

struct DeviceProfile {
    std::string name;         // e.g. "aldercrest-flowquill-3"
    std::string source_file;  // where it was loaded from, for messages
    std::string code_system;  // written to SourceForm::code_system, e.g. "Aldercrest FlowQuill"
    Device device;            // manufacturer / model defaults when the device sends none
    std::vector<CodeMapping> codes;
    // Times the device sends without an offset are local to this IANA zone
    // (e.g. "Europe/Oslo"); converted at read time by the caller's resolver.
    std::string time_zone;
    std::string datetime_format = "%Y%m%d%H%M%S";  // strptime-style, for CSV and odd ASTM dates
    std::string charset = "ASCII";                 // ASCII, ISO-8859-1 or UTF-8
    char decimal_separator = '.';
    std::string equation_set;  // label of the device's own predicted values, e.g. "GLI-2012"
    std::string patient_identifier_system;  // system given to bare patient numbers
    std::optional<CsvLayout> csv;
    // Added for the ASTM E1394 reader (issue 3):
    std::vector<UnitAlias> unit_aliases;       // the device's unit spellings
    std::vector<CommentValue> comment_values;  // values sent in comment records
    std::string laboratory_identifier_system;  // system of the lab's own patient number
    std::string height_unit;                   // UCUM unit of a height sent without one
    std::string weight_unit;                   // UCUM unit of a weight sent without one

    const CodeMapping* find_code(std::string_view code) const {
        for (const auto& c : codes)
            if (c.code == code) return &c;
        return nullptr;
    }
    // The UCUM unit a device spelling stands for, or nullptr when the profile has none.
    const std::string* ucum_for(std::string_view sent) const {
        for (const auto& a : unit_aliases)
            if (a.sent == sent) return &a.ucum;
        return nullptr;
    }
};

// A local date and time without an offset, as devices send them.
struct LocalDateTime {
    Date date;
    int hour = 0;
    int minute = 0;
    int second = 0;
};

// Gives the UTC offset (minutes) of a local time in the profile's zone. The
// core has no time-zone database; the CLI supplies one (howardhinnant date/tz.h).
using OffsetResolver = std::optional<int> (*)(const std::string& zone, const LocalDateTime& local);

}  // namespace pftgw

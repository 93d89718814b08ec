// CSV archive reader: legacy exports, one row per session or one row per
// value, laid out as the device profile's CsvLayout says. Streaming: bytes are
// fed in chunks and results are handed out as soon as they are complete, so
// memory does not grow with the file. Produces results as received (units and
// conditions as sent or as the profile says); core's normalize() converts.
#pragma once

#include <functional>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "gateway/core/device_profile.hpp"
#include "gateway/core/model.hpp"

namespace pftgw::csv {

// One result read from the archive, or the findings of a row that gave none.
struct CsvRecord {
    std::string source;  // "export.csv:17" (the first line of the row or session)
    std::optional<NeutralResult> result;
    std::vector<Finding> findings;
};

using Emit = std::function<void(CsvRecord&&)>;

class CsvReader {
public:
    // `resolver` gives the UTC offset of local times in profile.time_zone; it
    // may be null when every time in the file carries its own offset.
    CsvReader(const DeviceProfile& profile, OffsetResolver resolver, std::string source_name);

    // Feeds the next chunk of the file; emits every result completed by it.
    void feed(std::string_view chunk, const Emit& emit);
    // End of file: emits what is pending; a row cut off inside quotes is a
    // "csv.truncated" finding, never half a result.
    void finish(const Emit& emit);

    std::size_t rows_read() const { return rows_; }

private:
    void on_row(std::vector<std::string>&& fields, std::size_t line, const Emit& emit);
    void session_row(const std::vector<std::string>& fields, std::size_t line, const Emit& emit);
    void value_row(const std::vector<std::string>& fields, std::size_t line, const Emit& emit);
    void flush_session(const Emit& emit);
    bool apply_field(NeutralResult& r, const std::string& target, const std::string& text,
                     const CsvColumn* column, std::vector<Finding>& findings,
                     const std::string& where);
    void add_quantity(NeutralResult& r, const std::string& kind, const std::string& text,
                      const std::string& unit, std::optional<GasCondition> condition,
                      const std::string& code, std::vector<Finding>& findings,
                      const std::string& where);
    std::string to_utf8(const std::string& s) const;
    int column_index(const std::string& name) const;

    const DeviceProfile& profile_;
    const CsvLayout layout_;
    OffsetResolver resolver_;
    std::string source_;
    // Parser state across chunks.
    std::vector<std::string> fields_;
    std::string field_;
    bool in_quotes_ = false;
    bool quote_pending_ = false;  // a quote inside quotes: closing, or the first of a doubled one
    bool row_has_data_ = false;
    std::size_t line_ = 1;
    std::size_t row_start_line_ = 1;
    std::size_t rows_ = 0;
    std::vector<std::string> header_;
    // row_per_value: the session being collected.
    std::optional<CsvRecord> session_;
    std::string session_key_;
};

}  // namespace pftgw::csv

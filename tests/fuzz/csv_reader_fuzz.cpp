// libFuzzer target for the CSV archive reader: arbitrary bytes, under a layout
// picked by the first byte (separator, shape, charset, decimal separator).
// Checks: no crash; reading the input whole and in arbitrary chunks gives the
// same records (the parser's state carries correctly across chunk edges).
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <string_view>
#include <vector>

#include "adapters/csv/csv_reader.hpp"

namespace {

using namespace pftgw;

DeviceProfile profile_for(std::uint8_t pick) {
    DeviceProfile p;
    p.name = "fuzz";
    p.patient_identifier_system = "https://fuzz.example/mrn";
    p.charset = (pick & 1) ? "ISO-8859-1" : "UTF-8";
    p.decimal_separator = (pick & 2) ? ',' : '.';
    p.datetime_format = "%Y%m%d%H%M%S";
    p.codes = {{"F1", "FEV1", std::nullopt, "L", GasCondition::btps, false, false},
               {"DL", "DLCO", std::nullopt, "mL/min/mm[Hg]", std::nullopt, false, false}};
    CsvLayout l;
    l.separator = (pick & 4) ? ';' : ',';
    l.has_header = !(pick & 16);
    if (pick & 8) {
        l.shape = CsvLayout::Shape::row_per_value;
        l.session_column = "s";
        l.code_column = "c";
        l.value_column = "v";
        l.unit_column = "u";
        l.columns = {{"id", "subject.identifier", "", std::nullopt}};
    } else {
        l.columns = {{"id", "subject.identifier", "", std::nullopt},
                     {"t", "session_time", "", std::nullopt},
                     {"fev1", "FEV1", "mL", GasCondition::atps},
                     {"fev1p", "FEV1.pred", "L", std::nullopt},
                     {"sex", "subject.sex_at_birth", "", std::nullopt},
                     {"1", "subject.family_name", "", std::nullopt}};
    }
    p.csv = l;
    return p;
}

std::vector<csv::CsvRecord> read(const DeviceProfile& p, std::string_view bytes, std::size_t step) {
    std::vector<csv::CsvRecord> out;
    csv::CsvReader r(p, nullptr, "fuzz.csv");
    const csv::Emit emit = [&](csv::CsvRecord&& rec) { out.push_back(std::move(rec)); };
    if (step == 0) {
        r.feed(bytes, emit);
    } else {
        for (std::size_t i = 0; i < bytes.size(); i += step) r.feed(bytes.substr(i, step), emit);
    }
    r.finish(emit);
    return out;
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
    if (size < 2) return 0;
    const DeviceProfile p = profile_for(data[0]);
    const std::size_t step = 1 + data[1] % 13;
    const std::string_view bytes(reinterpret_cast<const char*>(data + 2), size - 2);
    const auto whole = read(p, bytes, 0);
    const auto pieces = read(p, bytes, step);
    if (whole.size() != pieces.size()) std::abort();
    for (std::size_t i = 0; i < whole.size(); ++i) {
        if (whole[i].source != pieces[i].source || whole[i].findings != pieces[i].findings ||
            whole[i].result.has_value() != pieces[i].result.has_value())
            std::abort();
        if (whole[i].result && !(*whole[i].result == *pieces[i].result)) std::abort();
    }
    return 0;
}

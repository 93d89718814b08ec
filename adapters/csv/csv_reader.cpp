// See csv_reader.hpp.
#include "adapters/csv/csv_reader.hpp"

#include <charconv>
#include <cstdio>

#include "gateway/core/quantity_table.hpp"
#include "gateway/core/time.hpp"

namespace pftgw::csv {
namespace {

std::string trim(const std::string& s) {
    const auto b = s.find_first_not_of(" \t");
    if (b == std::string::npos) return {};
    const auto e = s.find_last_not_of(" \t\r");
    return s.substr(b, e - b + 1);
}

Finding finding(std::string rule, Severity sev, std::string path, std::string message,
                std::vector<std::pair<std::string, std::string>> values = {}) {
    return Finding{std::move(rule), sev, std::move(path), std::move(message), std::move(values)};
}

std::optional<double> parse_number(std::string text, char decimal_separator) {
    if (decimal_separator == ',')
        for (char& c : text)
            if (c == ',') c = '.';
    double v = 0;
    const char* b = text.data();
    const char* e = b + text.size();
    if (b != e && *b == '+') ++b;
    auto [p, ec] = std::from_chars(b, e, v);
    if (ec != std::errc() || p != e) return std::nullopt;
    return v;
}

// strptime-style subset: %Y %m %d %H %M %S and literal characters.
std::optional<LocalDateTime> parse_local(const std::string& text, const std::string& format) {
    LocalDateTime t;
    std::size_t i = 0;
    auto digits = [&](int n, int& out) {
        if (i + static_cast<std::size_t>(n) > text.size()) return false;
        int v = 0;
        for (int k = 0; k < n; ++k) {
            const char c = text[i + static_cast<std::size_t>(k)];
            if (c < '0' || c > '9') return false;
            v = v * 10 + (c - '0');
        }
        i += static_cast<std::size_t>(n);
        out = v;
        return true;
    };
    for (std::size_t f = 0; f < format.size(); ++f) {
        if (format[f] != '%' || f + 1 == format.size()) {
            if (i >= text.size() || text[i] != format[f]) return std::nullopt;
            ++i;
            continue;
        }
        bool ok = true;
        switch (format[++f]) {
            case 'Y':
                ok = digits(4, t.date.year);
                break;
            case 'm':
                ok = digits(2, t.date.month);
                break;
            case 'd':
                ok = digits(2, t.date.day);
                break;
            case 'H':
                ok = digits(2, t.hour);
                break;
            case 'M':
                ok = digits(2, t.minute);
                break;
            case 'S':
                ok = digits(2, t.second);
                break;
            case '%':
                ok = i < text.size() && text[i++] == '%';
                break;
            default:
                return std::nullopt;
        }
        if (!ok) return std::nullopt;
    }
    if (i != text.size() || !is_valid_date(t.date) || t.hour > 23 || t.minute > 59 || t.second > 60)
        return std::nullopt;
    return t;
}

Test& test_of(NeutralResult& r, TestType type) {
    if (Test* t = r.find_test(type)) return *t;
    Test t;
    t.type = type;
    r.tests.push_back(std::move(t));
    return r.tests.back();
}

}  // namespace

CsvReader::CsvReader(const DeviceProfile& profile, OffsetResolver resolver, std::string source_name)
    : profile_(profile),
      layout_(profile.csv.value_or(CsvLayout{})),
      resolver_(resolver),
      source_(std::move(source_name)) {}

std::string CsvReader::to_utf8(const std::string& s) const {
    if (profile_.charset != "ISO-8859-1") return s;
    std::string out;
    out.reserve(s.size());
    for (unsigned char c : s) {
        if (c < 0x80) {
            out += static_cast<char>(c);
        } else {  // ISO-8859-1 is the first 256 code points of Unicode
            out += static_cast<char>(0xC0 | (c >> 6));
            out += static_cast<char>(0x80 | (c & 0x3F));
        }
    }
    return out;
}

void CsvReader::feed(std::string_view chunk, const Emit& emit) {
    const char sep = layout_.separator;
    const char quote = layout_.quote;
    for (const char c : chunk) {
        if (quote_pending_) {
            quote_pending_ = false;
            if (c == quote) {  // a doubled quote stands for one
                field_ += quote;
                continue;
            }
            in_quotes_ = false;  // that quote closed the field; fall through
        }
        if (in_quotes_) {
            if (c == quote)
                quote_pending_ = true;
            else {
                if (c == '\n') ++line_;
                field_ += c;
            }
            continue;
        }
        if (c == quote && field_.empty()) {
            in_quotes_ = true;
            row_has_data_ = true;
        } else if (c == sep) {
            fields_.push_back(std::move(field_));
            field_.clear();
            row_has_data_ = true;
        } else if (c == '\n') {
            if (!field_.empty() && field_.back() == '\r') field_.pop_back();
            if (row_has_data_ || !field_.empty()) {
                fields_.push_back(std::move(field_));
                on_row(std::move(fields_), row_start_line_, emit);
            }
            fields_.clear();
            field_.clear();
            row_has_data_ = false;
            ++line_;
            row_start_line_ = line_;
        } else {
            field_ += c;
            if (c != '\r') row_has_data_ = true;
        }
    }
}

void CsvReader::finish(const Emit& emit) {
    if (in_quotes_ && !quote_pending_) {
        CsvRecord rec;
        rec.source = source_ + ":" + std::to_string(row_start_line_);
        rec.findings.push_back(
            finding("csv.truncated", Severity::error, "",
                    rec.source + ": the file ends inside a quoted field; the row is not used"));
        emit(std::move(rec));
    } else if (row_has_data_ || !field_.empty()) {
        if (!field_.empty() && field_.back() == '\r') field_.pop_back();
        fields_.push_back(std::move(field_));
        on_row(std::move(fields_), row_start_line_, emit);
    }
    fields_.clear();
    field_.clear();
    in_quotes_ = quote_pending_ = row_has_data_ = false;
    flush_session(emit);
}

int CsvReader::column_index(const std::string& name) const {
    for (std::size_t i = 0; i < header_.size(); ++i)
        if (header_[i] == name) return static_cast<int>(i);
    return -1;
}

void CsvReader::on_row(std::vector<std::string>&& fields, std::size_t line, const Emit& emit) {
    if (header_.empty() && layout_.has_header) {
        for (auto& f : fields) header_.push_back(trim(to_utf8(f)));
        // Every column the layout names must be in the header: say so once.
        std::vector<std::string> missing;
        for (const auto& c : layout_.columns)
            if (column_index(c.column) < 0) missing.push_back(c.column);
        for (const std::string* k :
             {&layout_.session_column, &layout_.code_column, &layout_.value_column})
            if (layout_.shape == CsvLayout::Shape::row_per_value && column_index(*k) < 0)
                missing.push_back(*k);
        if (!missing.empty()) {
            CsvRecord rec;
            rec.source = source_ + ":1";
            std::string list;
            for (const auto& m : missing) list += (list.empty() ? "" : ", ") + m;
            rec.findings.push_back(
                finding("csv.missing-column", Severity::warning, "",
                        rec.source + ": the header lacks the profile's column(s) " + list,
                        {{"columns", list}}));
            emit(std::move(rec));
        }
        return;
    }
    ++rows_;
    for (auto& f : fields) f = to_utf8(f);
    if (layout_.shape == CsvLayout::Shape::row_per_value)
        value_row(fields, line, emit);
    else
        session_row(fields, line, emit);
}

void CsvReader::add_quantity(NeutralResult& r, const std::string& kind, const std::string& text,
                             const std::string& unit, std::optional<GasCondition> condition,
                             const std::string& code, std::vector<Finding>& findings,
                             const std::string& where) {
    const auto& table = quantity_table();
    const QuantityKind* k = table.find(kind);
    if (!k) {
        findings.push_back(
            finding("quantity.unknown-kind", Severity::error, where,
                    where + ": profile maps to kind '" + kind + "', not in the quantity table"));
        return;
    }
    const std::string* alias = profile_.ucum_for(unit);
    const std::string ucum = alias ? *alias : unit;
    const auto number = parse_number(text, profile_.decimal_separator);
    if (k->variant != "measured") {
        // A predicted / LLN / ULN / z / percent-predicted column: a reference set on its base kind.
        Test& t = test_of(r, parse_test_type(k->test).value_or(TestType::spirometry));
        Quantity* base = t.find(k->base);
        if (!base) {
            Quantity q;
            q.kind = k->base;
            q.absent_reason = "not-sent";
            t.values.push_back(std::move(q));
            base = &t.values.back();
        }
        if (base->reference.empty()) {
            ReferenceValues rv;
            rv.equation_set =
                profile_.equation_set.empty() ? "device (unnamed)" : profile_.equation_set;
            base->reference.push_back(std::move(rv));
        }
        ReferenceValues& rv = base->reference.front();
        if (!number) {
            findings.push_back(finding("value.not-numeric", Severity::error, where,
                                       where + ": " + kind + " '" + text + "' is not a number"));
            return;
        }
        if (k->variant == "predicted")
            rv.predicted = number;
        else if (k->variant == "lln")
            rv.lln = number;
        else if (k->variant == "uln")
            rv.uln = number;
        else if (k->variant == "z")
            rv.z_score = number;
        else if (k->variant == "percent_predicted")
            rv.percent_predicted = number;
        if (k->variant == "predicted" || k->variant == "lln" || k->variant == "uln") rv.unit = ucum;
        return;
    }
    Quantity q;
    q.kind = kind;
    q.value = number;
    q.unit = ucum;
    q.condition = condition.value_or(GasCondition::unspecified);
    q.source = SourceForm{text, unit, condition ? std::string(to_string(*condition)) : "", code,
                          profile_.code_system};
    if (k->test == "subject") {
        (kind == "HEIGHT" ? r.subject.height : r.subject.weight) = std::move(q);
    } else if (k->test == "environment") {
        (kind == "AMB_TEMP" ? r.environment.temperature
         : kind == "PB"     ? r.environment.pressure
                            : r.environment.humidity) = std::move(q);
    } else {
        Test& t = test_of(r, parse_test_type(k->test).value_or(TestType::spirometry));
        if (Quantity* existing = t.find(kind); existing && existing->absent_reason) {
            q.reference = std::move(existing->reference);
            *existing = std::move(q);
        } else {
            t.values.push_back(std::move(q));
        }
    }
}

bool CsvReader::apply_field(NeutralResult& r, const std::string& target, const std::string& raw,
                            const CsvColumn* column, std::vector<Finding>& findings,
                            const std::string& where) {
    const std::string text = trim(raw);
    if (text.empty()) return true;  // an empty cell is "not sent", never a 0
    if (target == "subject.identifier") {
        r.subject.identifiers.push_back({profile_.patient_identifier_system, text, "MR"});
    } else if (target == "subject.family_name") {
        r.subject.family_name = text;
    } else if (target == "subject.given_name") {
        r.subject.given_name = text;
    } else if (target == "subject.birth_date") {
        auto d = parse_iso_date(text);
        if (!d) {
            auto local = parse_local(text + "000000", profile_.datetime_format);
            if (!local) {
                findings.push_back(finding("time.invalid", Severity::error, "subject.birthDate",
                                           where + ": birth date '" + text + "' does not parse"));
                return false;
            }
            r.subject.birth_date = local->date;
        } else {
            r.subject.birth_date = *d;
        }
    } else if (target == "subject.sex_at_birth") {
        const std::string t = text.size() == 1 ? (text == "M" || text == "m"   ? "male"
                                                  : text == "F" || text == "f" ? "female"
                                                                               : "unknown")
                                               : text;
        auto sex = parse_sex_at_birth(t);
        if (!sex) {
            findings.push_back(
                finding("schema.invalid-value", Severity::error, "subject.sexAtBirth",
                        where + ": sex '" + text + "' is not M, F, male, female or unknown"));
            return false;
        }
        r.subject.sex_at_birth = *sex;
    } else if (target == "session_time") {
        if (auto iso = parse_iso_timestamp(text); iso) {
            r.session_time = *iso;
        } else {
            auto local = parse_local(text, profile_.datetime_format);
            if (!local) {
                findings.push_back(finding("time.invalid", Severity::error, "sessionTime",
                                           where + ": time '" + text + "' does not match '" +
                                               profile_.datetime_format + "'"));
                return false;
            }
            std::optional<int> offset;
            if (resolver_ && !profile_.time_zone.empty())
                offset = resolver_(profile_.time_zone, *local);
            if (!offset) {
                findings.push_back(
                    finding("time.no-offset", Severity::error, "sessionTime",
                            where + ": local time '" + text +
                                "' and no time zone to place it (set time_zone in the profile)"));
                return false;
            }
            Timestamp ts;
            ts.date = local->date;
            ts.hour = local->hour;
            ts.minute = local->minute;
            ts.second = local->second;
            ts.offset_minutes = *offset;
            r.session_time = ts;
        }
    } else if (target == "device.id") {
        r.device.id = text;
    } else if (target == "device_session_number") {
        r.device_session_number = text;
    } else if (target == "subject.laboratory_identifier") {
        r.subject.identifiers.push_back({profile_.laboratory_identifier_system, text, "PI"});
    } else if (target == "order.accession_number") {
        r.order.accession_number = text;
    } else if (target == "order.placer_number") {
        r.order.placer_number = text;
    } else if (target == "order.filler_number") {
        r.order.filler_number = text;
    } else if (target == "test.comment") {
        if (!r.tests.empty()) r.tests.front().comments.push_back(text);
    } else {
        add_quantity(r, target, text, column ? column->unit : "",
                     column ? column->condition : std::nullopt, column ? column->column : "",
                     findings, where);
    }
    return true;
}

void CsvReader::session_row(const std::vector<std::string>& fields, std::size_t line,
                            const Emit& emit) {
    CsvRecord rec;
    rec.source = source_ + ":" + std::to_string(line);
    if (layout_.has_header && fields.size() < header_.size()) {
        rec.findings.push_back(
            finding("csv.short-row", Severity::error, "",
                    rec.source + ": " + std::to_string(fields.size()) + " fields, the header has " +
                        std::to_string(header_.size()) + "; the row is not used (truncated?)"));
        emit(std::move(rec));
        return;
    }
    NeutralResult r;
    r.device = profile_.device;
    for (const auto& col : layout_.columns) {
        const int idx =
            layout_.has_header ? column_index(col.column) : std::atoi(col.column.c_str()) - 1;
        if (idx < 0 || static_cast<std::size_t>(idx) >= fields.size()) continue;
        apply_field(r, col.target, fields[static_cast<std::size_t>(idx)], &col, rec.findings,
                    rec.source + " column " + col.column);
    }
    // Tests carry the session time unless they have their own.
    for (auto& t : r.tests)
        if (!t.time) t.time = r.session_time;
    rec.result = std::move(r);
    emit(std::move(rec));
}

void CsvReader::value_row(const std::vector<std::string>& fields, std::size_t line,
                          const Emit& emit) {
    auto cell = [&](const std::string& name) -> std::string {
        const int idx = column_index(name);
        return idx >= 0 && static_cast<std::size_t>(idx) < fields.size()
                   ? trim(fields[static_cast<std::size_t>(idx)])
                   : "";
    };
    const std::string where = source_ + ":" + std::to_string(line);
    if (fields.size() < header_.size()) {
        CsvRecord rec;
        rec.source = where;
        rec.findings.push_back(
            finding("csv.short-row", Severity::error, "",
                    where + ": " + std::to_string(fields.size()) + " fields, the header has " +
                        std::to_string(header_.size()) + "; the row is not used (truncated?)"));
        emit(std::move(rec));
        return;
    }
    const std::string key = cell(layout_.session_column);
    if (!session_ || key != session_key_) {
        flush_session(emit);
        session_.emplace();
        session_->source = where;
        session_->result.emplace();
        session_->result->device = profile_.device;
        session_key_ = key;
        for (const auto& col : layout_.columns) {
            const int idx = column_index(col.column);
            if (idx >= 0 && static_cast<std::size_t>(idx) < fields.size())
                apply_field(*session_->result, col.target, fields[static_cast<std::size_t>(idx)],
                            &col, session_->findings, where + " column " + col.column);
        }
    }
    const std::string code = cell(layout_.code_column);
    const std::string value = cell(layout_.value_column);
    const std::string unit = layout_.unit_column.empty() ? "" : cell(layout_.unit_column);
    const CodeMapping* m = profile_.find_code(code);
    if (!m) {
        session_->findings.push_back(finding("profile.unmapped-code", Severity::warning, "",
                                             where + ": code '" + code +
                                                 "' is not mapped by profile " + profile_.name +
                                                 "; kept in this finding, not converted",
                                             {{"code", code}, {"value", value}, {"unit", unit}}));
        return;
    }
    const bool use_profile = m->override_sent || unit.empty();
    add_quantity(*session_->result, m->kind, value, use_profile ? m->unit : unit, m->condition,
                 code, session_->findings, where);
}

void CsvReader::flush_session(const Emit& emit) {
    if (!session_) return;
    for (auto& t : session_->result->tests)
        if (!t.time) t.time = session_->result->session_time;
    emit(std::move(*session_));
    session_.reset();
    session_key_.clear();
}

}  // namespace pftgw::csv

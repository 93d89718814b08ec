// Two emitters with one interface, so one walk over the result writes both
// FHIR JSON and FHIR XML: the walk calls them in R4 element order, which XML
// needs and JSON does not mind. Internal to adapters/fhir.
#pragma once

#include <array>
#include <cstring>
#include <string>
#include <string_view>
#include <vector>

namespace pftgw::fhir::detail {

// JSON string body: quotes, backslash and control characters escaped
// (RFC 8259 section 7); other bytes, UTF-8 included, passed through.
void append_json_escaped(std::string& out, std::string_view text);

// Length of the longest prefix of text that needs no JSON escaping.
std::size_t json_safe_prefix(std::string_view text);

// Slots of the fragments a Bundle writes many times with the same bytes
// (fragment() below).
inline constexpr std::size_t kFragmentSlots = 4;

// XML attribute text: & < > " escaped, tab / LF / CR as character references
// (kept by attribute-value normalization, XML 1.0 section 3.3.3); other control
// characters cannot be written in XML 1.0 and become U+FFFD.
void append_xml_escaped(std::string& out, std::string_view text);

// Streams JSON into a string; no DOM. Every begin_* has its end_*.
class JsonEmitter {
public:
    explicit JsonEmitter(std::string& out) : out_(out) {}

    void begin_root(std::string_view type) {
        out_ += "{\"resourceType\":\"";
        out_ += type;
        out_ += '"';
        comma_ = true;
    }
    void end_root() { out_ += "}\n"; }

    // Bundle.entry.resource: {"resourceType": type, ...}
    void begin_resource(std::string_view type) {
        key("resource");
        out_ += "{\"resourceType\":\"";
        out_ += type;
        out_ += '"';
        comma_ = true;
    }
    void end_resource() { close('}'); }

    // A primitive; empty text is never written (FHIR has no empty strings).
    void string(std::string_view name, std::string_view text) {
        if (text.empty()) return;
        // Most values need no escaping: `,"name":"text"` in one append.
        if (name.size() + text.size() + 6 <= kInlineBytes &&
            json_safe_prefix(text) == text.size()) {
            char buf[kInlineBytes];
            std::size_t n = 0;
            if (comma_) buf[n++] = ',';
            buf[n++] = '"';
            std::memcpy(buf + n, name.data(), name.size());
            n += name.size();
            buf[n++] = '"';
            buf[n++] = ':';
            buf[n++] = '"';
            std::memcpy(buf + n, text.data(), text.size());
            n += text.size();
            buf[n++] = '"';
            out_.append(buf, n);
            comma_ = true;
            return;
        }
        key(name, '"');
        append_json_escaped(out_, text);
        out_ += '"';
        comma_ = true;
    }

    // Content that is the same every time within one Bundle (a category, the
    // subject reference): written by `write` the first time, then copied.
    // The walk still calls the same emitter methods, so JSON and XML agree.
    template <class Write>
    void fragment(std::size_t slot, Write&& write) {
        std::string& cached = fragments_[slot];
        if (cached.empty()) {
            // Recorded with its leading comma, which is dropped when not due.
            const bool had_comma = comma_;
            comma_ = true;
            const std::size_t start = out_.size();
            write();
            if (out_.size() == start) {
                comma_ = had_comma;
                return;
            }
            cached.assign(out_, start, std::string::npos);
            if (!had_comma) out_.erase(start, 1);
        } else {
            const std::size_t skip = comma_ ? 0 : 1;
            out_.append(cached.data() + skip, cached.size() - skip);
        }
        comma_ = true;
    }
    // A decimal already formatted as a JSON number.
    void decimal(std::string_view name, std::string_view number) {
        key(name);
        out_ += number;
        comma_ = true;
    }

    void begin_object(std::string_view name) {
        key(name, '{');
        comma_ = false;
    }
    void end_object() { close('}'); }

    void begin_array(std::string_view name) {
        key(name, '[');
        comma_ = false;
    }
    void end_array() { close(']'); }

    void begin_item() {
        if (comma_)
            out_.append(",{", 2);
        else
            out_ += '{';
        comma_ = false;
    }
    void end_item() { close('}'); }
    void string_item(std::string_view text) {
        separate();
        out_ += '"';
        append_json_escaped(out_, text);
        out_ += '"';
        comma_ = true;
    }
    // An item of an `extension` array: url is a member in JSON.
    void begin_extension(std::string_view url) {
        begin_item();
        string("url", url);
    }
    void end_extension() { end_item(); }

private:
    void separate() {
        if (comma_) out_ += ',';
    }
    // `,"name":` and an optional opening character, in one append: single-character
    // appends dominated the profile.
    void key(std::string_view name, char open = 0) {
        char buf[kMaxKeyBytes];
        if (name.size() + 5 > sizeof buf) {
            separate();
            out_ += '"';
            out_ += name;
            out_ += "\":";
            if (open != 0) out_ += open;
            return;
        }
        std::size_t n = 0;
        if (comma_) buf[n++] = ',';
        buf[n++] = '"';
        std::memcpy(buf + n, name.data(), name.size());
        n += name.size();
        buf[n++] = '"';
        buf[n++] = ':';
        if (open != 0) buf[n++] = open;
        out_.append(buf, n);
    }
    static constexpr std::size_t kMaxKeyBytes = 64;
    static constexpr std::size_t kInlineBytes = 256;
    void close(char c) {
        out_ += c;
        comma_ = true;
    }

    std::string& out_;
    bool comma_ = false;
    std::array<std::string, kFragmentSlots> fragments_;
};

// Writes FHIR XML: namespace http://hl7.org/fhir, primitives as value
// attributes, a repeating element once per item. Names are string literals.
class XmlEmitter {
public:
    explicit XmlEmitter(std::string& out) : out_(out) { names_.reserve(16); }

    void begin_root(std::string_view type) {
        out_ += "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<";
        out_ += type;
        out_ += " xmlns=\"http://hl7.org/fhir\">";
        names_.push_back(type);
    }
    void end_root() {
        close_tag(names_.back());
        names_.pop_back();
        out_ += '\n';
    }

    // Bundle.entry.resource: <resource><Type xmlns="...">...</Type></resource>
    void begin_resource(std::string_view type) {
        out_ += "<resource><";
        out_ += type;
        out_ += " xmlns=\"http://hl7.org/fhir\">";
        names_.push_back(type);
    }
    void end_resource() {
        close_tag(names_.back());
        names_.pop_back();
        out_ += "</resource>";
    }

    void string(std::string_view name, std::string_view text) {
        if (text.empty()) return;
        value_element(name, text, true);
    }
    void decimal(std::string_view name, std::string_view number) {
        value_element(name, number, false);
    }

    template <class Write>
    void fragment(std::size_t slot, Write&& write) {
        std::string& cached = fragments_[slot];
        if (!cached.empty()) {
            out_ += cached;
            return;
        }
        const std::size_t start = out_.size();
        write();
        cached.assign(out_, start, std::string::npos);
    }

    void begin_object(std::string_view name) {
        open_tag(name);
        names_.push_back(name);
    }
    void end_object() {
        close_tag(names_.back());
        names_.pop_back();
    }

    // An array is only a name here: each item repeats the element.
    void begin_array(std::string_view name) { names_.push_back(name); }
    void end_array() { names_.pop_back(); }

    void begin_item() { open_tag(names_.back()); }
    void end_item() { close_tag(names_.back()); }
    void string_item(std::string_view text) {
        if (text.empty()) return;
        value_element(names_.back(), text, true);
    }
    // An item of an `extension` array: url is an attribute in XML.
    void begin_extension(std::string_view url) {
        out_ += '<';
        out_ += names_.back();
        out_ += " url=\"";
        append_xml_escaped(out_, url);
        out_ += "\">";
    }
    void end_extension() { end_item(); }

private:
    void open_tag(std::string_view name) {
        out_ += '<';
        out_ += name;
        out_ += '>';
    }
    void close_tag(std::string_view name) {
        out_ += "</";
        out_ += name;
        out_ += '>';
    }
    void value_element(std::string_view name, std::string_view text, bool escape) {
        out_ += '<';
        out_ += name;
        out_ += " value=\"";
        if (escape)
            append_xml_escaped(out_, text);
        else
            out_ += text;
        out_ += "\"/>";
    }

    std::string& out_;
    std::vector<std::string_view> names_;
    std::array<std::string, kFragmentSlots> fragments_;
};

}  // namespace pftgw::fhir::detail

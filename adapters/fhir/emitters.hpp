// Two emitters with one interface, so one walk over the result writes both
// FHIR JSON and FHIR XML: the walk calls them in R4 element order, which XML
// needs and JSON does not mind. Internal to adapters/fhir.
#pragma once

#include <algorithm>
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

// Copies a short run without a library call (most runs here are keys, codes
// and URLs of a few dozen bytes); long runs go to memcpy.
inline void copy_bytes(char* dst, const char* src, std::size_t n) {
    constexpr std::size_t kLong = 32;
    if (n > kLong) {
        std::memcpy(dst, src, n);
    } else if (n >= 16) {
        std::memcpy(dst, src, 16);  // two overlapping 16-byte moves
        std::memcpy(dst + n - 16, src + n - 16, 16);
    } else if (n >= 8) {
        std::memcpy(dst, src, 8);
        std::memcpy(dst + n - 8, src + n - 8, 8);
    } else if (n >= 4) {
        std::memcpy(dst, src, 4);
        std::memcpy(dst + n - 4, src + n - 4, 4);
    } else {
        for (std::size_t i = 0; i < n; ++i) dst[i] = src[i];
    }
}

// Streams JSON into a string; no DOM. Every begin_* has its end_*.
// The string is grown in large steps and written in place (used_ bytes are
// real); end_root() trims it, so the output is complete after end_root().
class JsonEmitter {
public:
    explicit JsonEmitter(std::string& out) : out_(out), used_(out.size()) {}

    void begin_root(std::string_view type) {
        put("{\"resourceType\":\"");
        put(type);
        put('"');
        comma_ = true;
    }
    void end_root() {
        put("}\n");
        out_.resize(used_);
    }

    // Bundle.entry.resource: {"resourceType": type, ...}
    void begin_resource(std::string_view type) {
        key("resource");
        put("{\"resourceType\":\"");
        put(type);
        put('"');
        comma_ = true;
    }
    void end_resource() { close('}'); }

    // A primitive; empty text is never written (FHIR has no empty strings).
    void string(std::string_view name, std::string_view text) {
        if (text.empty()) return;
        key(name, '"');
        if (json_safe_prefix(text) == text.size()) {
            // Most values need no escaping.
            put(text);
        } else {
            out_.resize(used_);
            append_json_escaped(out_, text);
            used_ = out_.size();
        }
        put('"');
        comma_ = true;
    }
    // A decimal already formatted as a JSON number.
    void decimal(std::string_view name, std::string_view number) {
        key(name);
        put(number);
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
            const std::size_t start = used_;
            write();
            if (used_ == start) {
                comma_ = had_comma;
                return;
            }
            cached.assign(out_.data() + start, used_ - start);
            if (!had_comma) {
                std::memmove(out_.data() + start, out_.data() + start + 1, used_ - start - 1);
                --used_;
            }
        } else {
            const std::size_t skip = comma_ ? 0 : 1;
            put(std::string_view(cached).substr(skip));
        }
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
            put(",{");
        else
            put('{');
        comma_ = false;
    }
    void end_item() { close('}'); }
    void string_item(std::string_view text) {
        if (comma_) put(',');
        put('"');
        out_.resize(used_);
        append_json_escaped(out_, text);
        used_ = out_.size();
        put('"');
        comma_ = true;
    }
    // An item of an `extension` array: url is a member in JSON.
    void begin_extension(std::string_view url) {
        begin_item();
        string("url", url);
    }
    void end_extension() { end_item(); }

private:
    // Growth step: resize() zero-fills what it adds, so add little at a time
    // (the capacity is kept, so this costs no allocation once warmed up).
    static constexpr std::size_t kGrowBytes = 4 * 1024;
    char* room(std::size_t n) {
        if (used_ + n > out_.size()) out_.resize(used_ + n + kGrowBytes);
        char* p = out_.data() + used_;
        used_ += n;
        return p;
    }
    void put(std::string_view text) { copy_bytes(room(text.size()), text.data(), text.size()); }
    void put(char c) { *room(1) = c; }

    // `,"name":` and an optional opening character.
    void key(std::string_view name, char open = 0) {
        char* p = room(name.size() + 5);
        std::size_t n = 0;
        if (comma_) p[n++] = ',';
        p[n++] = '"';
        copy_bytes(p + n, name.data(), name.size());
        n += name.size();
        p[n++] = '"';
        p[n++] = ':';
        if (open != 0) p[n++] = open;
        used_ -= name.size() + 5 - n;  // room() took the most it could need
    }
    void close(char c) {
        put(c);
        comma_ = true;
    }

    std::string& out_;
    std::size_t used_;
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

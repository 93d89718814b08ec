// See inputs.hpp.
#include "gateway/cli/inputs.hpp"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <fstream>
#include <iostream>
#include <nlohmann/json.hpp>

#include "adapters/astm/link_receiver.hpp"
#include "adapters/astm/message_splitter.hpp"
#include "adapters/astm/record_reader.hpp"
#include "adapters/csv/csv_reader.hpp"
#include "adapters/hl7v2/oru_reader.hpp"
#include "gateway/cli/local_time.hpp"

namespace fs = std::filesystem;

namespace pftgw::cli {
namespace {

// Every device file is read in pieces this size: memory does not grow with it.
constexpr std::size_t kReadChunkBytes = 256 * 1024;

// JSON Lines, line by line: an archive is never held in memory whole.
// `first` is a line already taken from `in`, with `lines_before` lines before it.
void read_jsonl(std::istream& in, const std::string& source, std::optional<std::string> first,
                int lines_before, const std::function<void(ReadItem&&)>& fn) {
    int line_no = lines_before;
    const auto take = [&](std::string&& text) {
        ++line_no;
        if (text.find_first_not_of(" \t\r") == std::string::npos) return;
        ReadItem item;
        item.source = source + ":" + std::to_string(line_no);
        item.bytes = std::move(text);
        fn(std::move(item));
    };
    if (first) take(std::move(*first));
    std::string line;
    while (std::getline(in, line)) take(std::move(line));
}

// Neutral documents on standard input: JSON Lines when the first line that
// is not blank is a JSON object of its own, else one XML or JSON document.
void read_neutral_stdin(const std::function<void(ReadItem&&)>& fn) {
    const std::string source(kStdinSource);
    std::string head;  // the blank lines and the first line that is not
    std::string line;
    int blank = 0;
    while (std::getline(std::cin, line)) {
        if (line.find_first_not_of(" \t\r") != std::string::npos) break;
        head += line + "\n";
        ++blank;
        line.clear();
    }
    if (!line.empty() && line[line.find_first_not_of(" \t")] == '{' &&
        nlohmann::json::accept(line)) {
        read_jsonl(std::cin, source, std::move(line), blank, fn);
        return;
    }
    ReadItem item;
    item.source = source;
    item.bytes = std::move(head) + line;
    if (std::cin) item.bytes += "\n";
    item.bytes.append(std::istreambuf_iterator<char>(std::cin), {});
    fn(std::move(item));
}

std::optional<int> offset_of(const std::string& zone, const LocalDateTime& local) {
    return resolve_utc_offset(zone, local);
}

// File-level findings go with the first item, or alone when nothing was read.
void emit_all(std::vector<ReadItem>&& items, std::vector<Finding>&& file_findings,
              const std::string& source, const std::function<void(ReadItem&&)>& fn) {
    if (items.empty()) {
        ReadItem lone;
        lone.source = source;
        lone.read = true;
        lone.findings = std::move(file_findings);
        if (lone.findings.empty())
            lone.findings.push_back(Finding{"read.empty",
                                            Severity::error,
                                            "",
                                            source + ": no result could be read from this input",
                                            {}});
        fn(std::move(lone));
        return;
    }
    items.front().findings.insert(items.front().findings.begin(), file_findings.begin(),
                                  file_findings.end());
    for (auto& item : items) fn(std::move(item));
}

// Hands the items of one file on, one behind, so that what is found about
// the file travels where it belongs:
// - an error (a message dropped, the file unreadable mid-way) is an item of
//   its own, with no result: it goes to the rejects, and blocks no result;
// - a warning about what follows (a stray segment) goes with the next item;
// - a warning about what came before (a batch count) goes with the item held.
// A file with no item gives one item of its findings (emit_all).
class HeldItems {
public:
    HeldItems(std::string source, const std::function<void(ReadItem&&)>& fn)
        : source_(std::move(source)), fn_(fn) {}
    std::string next_source() { return source_ + "#" + std::to_string(++count_); }

    void push(ReadItem&& item) {
        release();
        item.findings.insert(item.findings.begin(), pending_.begin(), pending_.end());
        pending_.clear();
        held_ = std::move(item);
    }
    void found(std::vector<Finding>&& findings, bool about_what_came_before = false) {
        std::vector<Finding> errors;
        for (auto& f : findings) {
            if (f.severity == Severity::error)
                errors.push_back(std::move(f));
            else if (about_what_came_before && held_)
                held_->findings.push_back(std::move(f));
            else
                pending_.push_back(std::move(f));
        }
        if (errors.empty()) return;
        release();
        ReadItem lone;
        lone.source = source_;
        lone.read = true;
        lone.findings = std::move(errors);
        fn_(std::move(lone));
        any_ = true;
    }
    void finish() {
        if (held_) {
            held_->findings.insert(held_->findings.end(), pending_.begin(), pending_.end());
            pending_.clear();
            release();
        } else if (!pending_.empty() || !any_) {
            emit_all({}, std::exchange(pending_, {}), source_, fn_);
        }
    }

private:
    void release() {
        if (!held_) return;
        fn_(std::move(*held_));
        held_.reset();
        any_ = true;
    }
    std::string source_;
    const std::function<void(ReadItem&&)>& fn_;
    std::optional<ReadItem> held_;
    std::vector<Finding> pending_;  // warnings for the next item
    std::size_t count_ = 0;
    bool any_ = false;  // something was handed on
};

}  // namespace

bool read_pieces(const fs::path& file, const std::function<void(std::string_view)>& piece,
                 std::string& error, bool* read_any) {
    const std::string source = source_name(file);
    const int fd = is_stdin(file) ? STDIN_FILENO : ::open(file.c_str(), O_RDONLY | O_CLOEXEC);
    if (read_any) *read_any = false;
    if (fd < 0) {
        error = "cannot open " + source + ": " + std::strerror(errno);
        return false;
    }
    static thread_local std::string chunk(kReadChunkBytes, '\0');  // filled once, not per file
    bool ok = true;
    for (;;) {
        const ssize_t n = ::read(fd, chunk.data(), chunk.size());
        if (n < 0 && errno == EINTR) continue;
        if (n < 0) {
            error = "cannot read " + source + ": " + std::strerror(errno);
            ok = false;
            break;
        }
        if (n == 0) break;
        if (read_any) *read_any = true;
        piece(std::string_view(chunk.data(), static_cast<std::size_t>(n)));
    }
    if (!is_stdin(file)) ::close(fd);
    return ok;
}

namespace {

// A neutral document, whole (it is one result).
bool read_whole(const fs::path& file, std::string& out, std::string& error) {
    out.clear();
    return read_pieces(
        file, [&](std::string_view piece) { out.append(piece); }, error, nullptr);
}

// HL7: splits only, streaming. Each message goes on as bytes, read later by
// finish_reading(); memory holds a message or two, whatever the file's size.
bool read_hl7_file(const fs::path& file, const std::function<void(ReadItem&&)>& fn,
                   std::string& error) {
    hl7v2::Hl7Splitter splitter;
    HeldItems items(source_name(file), fn);
    // A batch count is about the batch just ended (its last message is held);
    // a stray segment about what follows it.
    const auto pass_findings = [&] {
        std::vector<Finding> counts;
        std::vector<Finding> others;
        for (auto& f : splitter.take_findings())
            (f.rule == hl7v2::kRuleBatchCount ? counts : others).push_back(std::move(f));
        items.found(std::move(counts), true);
        items.found(std::move(others));
    };
    const hl7v2::Hl7Splitter::MessageFn on_message = [&](std::string_view bytes, std::size_t) {
        pass_findings();
        ReadItem item;
        item.source = items.next_source();
        item.format = InputFormat::hl7v2;
        item.bytes.assign(bytes);
        items.push(std::move(item));
    };
    bool read_any = false;
    const bool ok = read_pieces(
        file,
        [&](std::string_view piece) {
            splitter.feed(piece, on_message);
            pass_findings();  // a batch count found here is about the message held now
        },
        error, &read_any);
    if (!ok && !read_any) return false;  // nothing read: the file is unreadable
    splitter.finish(on_message);
    pass_findings();
    if (!ok) items.found({Finding{"read.unreadable", Severity::error, "", error, {}}});
    items.finish();
    return true;
}

// ASTM, streaming: an E1381 capture (its first bytes that are not blank are
// control bytes) goes through the link receiver piece by piece, exactly as on a serial port
// (checksums, frame numbers); plain E1394 text is cut before each H record.
// Each completed message is read as it comes; memory holds one message.
bool read_astm_file(const fs::path& file, const InputContext& c,
                    const std::function<void(ReadItem&&)>& fn, std::string& error) {
    const std::string source = source_name(file);
    HeldItems items(source, fn);
    const auto read_message = [&](std::string_view text) {
        auto outcome = astm::read_e1394(text, *c.profile, &offset_of, source);
        items.found(std::move(outcome.findings));
        for (auto& r : outcome.results) {
            ReadItem item;
            item.source = items.next_source();
            item.read = true;
            item.findings = r.findings;
            item.result = std::move(r);
            items.push(std::move(item));
        }
    };
    const auto discarded = [&](const std::vector<astm::Discard>& ds, const char* what) {
        std::vector<Finding> fs;
        for (const auto& d : ds)
            fs.push_back(
                Finding{"astm.message-discarded",
                        Severity::error,
                        "",
                        source + ": " + what + " (" + std::string(astm::to_string(d.reason)) + ")",
                        {}});
        items.found(std::move(fs));
    };
    const auto take = [&](astm::ReceiverActions&& actions) {
        discarded(actions.discards, "a partial message was dropped");
        std::vector<Finding> refused;
        for (const auto& e : actions.frame_errors)
            refused.push_back(
                Finding{"astm.frame-refused",
                        Severity::warning,
                        "",
                        source + ": a frame was refused and would be NAKed: " + e.message,
                        {}});
        items.found(std::move(refused));
        for (const auto& m : actions.messages) read_message(m);
    };
    // Framed or plain is settled by the first bytes that are not blank, not by
    // how the first read happened to end: E1381 starts with control bytes
    // (ENQ, STX), E1394 text with a record letter.
    std::optional<bool> framed;
    std::string undecided;
    astm::LinkReceiver receiver;
    astm::E1394Splitter plain;
    const astm::E1394Splitter::MessageFn on_message = read_message;
    const auto feed = [&](std::string_view piece) {
        if (*framed)
            take(receiver.feed(piece, 0));
        else
            plain.feed(piece, on_message);
    };
    bool read_any = false;
    const bool ok = read_pieces(
        file,
        [&](std::string_view piece) {
            if (framed) return feed(piece);
            undecided.append(piece);
            const auto first = undecided.find_first_not_of("\r\n \t");
            if (first == std::string::npos) return;
            framed = static_cast<unsigned char>(undecided[first]) < 0x20 ||
                     undecided.find_first_of("\x05\x02") != std::string::npos;
            feed(std::exchange(undecided, {}));
        },
        error, &read_any);
    if (!ok && !read_any) return false;
    if (framed.value_or(false)) {
        auto end = receiver.reset();
        discarded(end.discards, "the capture ends inside a message");
    } else {
        plain.feed(undecided, on_message);
        plain.finish(on_message);
    }
    if (!ok) items.found({Finding{"read.unreadable", Severity::error, "", error, {}}});
    items.finish();
    return true;
}

bool read_csv_file(const fs::path& file, const InputContext& c,
                   const std::function<void(ReadItem&&)>& fn, std::string& error) {
    csv::CsvReader reader(*c.profile, &offset_of, source_name(file));
    const csv::Emit emit = [&](csv::CsvRecord&& rec) {
        ReadItem item;
        item.source = std::move(rec.source);
        item.read = true;
        item.findings = std::move(rec.findings);
        item.result = std::move(rec.result);
        if (item.result)
            item.result->findings.insert(item.result->findings.end(), item.findings.begin(),
                                         item.findings.end());
        fn(std::move(item));
    };
    bool read_any = false;
    const bool ok = read_pieces(
        file, [&](std::string_view piece) { reader.feed(piece, emit); }, error, &read_any);
    if (!ok && !read_any) return false;
    reader.finish(emit);
    if (!ok) {  // the rows read so far stand; the failure is a reject of its own
        ReadItem lone;
        lone.source = source_name(file);
        lone.read = true;
        lone.findings.push_back(Finding{"read.unreadable", Severity::error, "", error, {}});
        fn(std::move(lone));
    }
    return true;
}

}  // namespace

void finish_reading(ReadItem& item, const InputContext& c) {
    if (item.read || item.format != InputFormat::hl7v2) return;
    hl7v2::Hl7ReadOptions options;
    options.profile = c.profile;
    options.resolve_offset = &offset_of;
    hl7v2::ReadMessage m = hl7v2::read_hl7_message(item.bytes, 0, item.bytes.size(), options);
    // The reader's findings travel in the result too; file findings come first.
    const std::vector<Finding>& read = m.result ? m.result->findings : m.findings;
    item.findings.insert(item.findings.end(), read.begin(), read.end());
    if (c.keep_hl7_messages) {
        item.result = m.result;  // a copy: the message keeps its own for the ACK's code
        item.hl7_message = std::make_shared<const hl7v2::ReadMessage>(std::move(m));
    } else {
        item.result = std::move(m.result);
    }
    item.read = true;
    item.bytes = std::string();  // the message is read: its bytes are not needed any more
}

bool is_stdin(const fs::path& p) {
    return p == kStdinArgument;
}

std::string source_name(const fs::path& p) {
    return is_stdin(p) ? std::string(kStdinSource) : p.string();
}

std::optional<InputFormat> parse_input_format(std::string_view t) {
    if (t == "neutral") return InputFormat::neutral;
    if (t == "hl7v2") return InputFormat::hl7v2;
    if (t == "astm") return InputFormat::astm;
    if (t == "csv") return InputFormat::csv;
    return std::nullopt;
}

bool is_input_file(const fs::path& p, InputFormat from) {
    const auto ext = p.extension().string();
    switch (from) {
        case InputFormat::neutral:
            return ext == ".xml" || ext == ".json" || ext == ".jsonl";
        case InputFormat::hl7v2:
            return ext == ".hl7" || ext == ".txt";
        case InputFormat::astm:
            return ext == ".astm" || ext == ".txt";
        case InputFormat::csv:
            return ext == ".csv" || ext == ".txt";
    }
    return false;
}

bool for_each_item(const fs::path& file, const InputContext& c,
                   const std::function<void(ReadItem&&)>& fn, std::string& error) {
    if (c.from == InputFormat::csv) return read_csv_file(file, c, fn, error);
    const std::string source = source_name(file);
    if (c.from == InputFormat::neutral && is_stdin(file)) {
        read_neutral_stdin(fn);
        return true;
    }
    if (c.from == InputFormat::neutral && file.extension() == ".jsonl") {
        std::ifstream in(file, std::ios::binary);
        if (!in) {
            error = "cannot open " + source;
            return false;
        }
        read_jsonl(in, source, std::nullopt, 0, fn);
        return true;
    }
    if (c.from == InputFormat::hl7v2) return read_hl7_file(file, fn, error);
    if (c.from == InputFormat::astm) return read_astm_file(file, c, fn, error);
    std::string bytes;
    if (!read_whole(file, bytes, error)) return false;
    switch (c.from) {
        case InputFormat::neutral: {
            ReadItem item;
            item.source = source;
            item.bytes = std::move(bytes);
            fn(std::move(item));
            return true;
        }
        case InputFormat::hl7v2:
            break;  // streamed above
        case InputFormat::astm:
            break;  // streamed above
        case InputFormat::csv:
            break;
    }
    return true;
}

}  // namespace pftgw::cli

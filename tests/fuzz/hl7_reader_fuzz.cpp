// libFuzzer target for the HL7 v2 ORU^R01 reader and the ACK writer
// (RELIABILITY.md: fuzzed input gives no crash and no half result).
// The input is a file as a device might send it. Checks, aborting on failure:
// - messages' byte ranges are inside the input, in order, not overlapping;
// - a message with a result was parsed, and its findings are the result's;
// - reading the same bytes again gives the same results (deterministic);
// - a message's own bytes read alone give the same control id;
// - the streaming splitter fed in pieces gives the same messages and file findings;
// - the ACK of a parsed message starts "MSH" + its field separator and holds
//   MSA with the received MSH-10; an unparsed message gets no ACK.
// Seed corpus: tests/fuzz/corpus/hl7_reader/ (valid, batched and broken files).
#include <cstddef>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <string_view>
#include <vector>

#include "adapters/hl7v2/ack_writer.hpp"
#include "adapters/hl7v2/oru_reader.hpp"

namespace {

using namespace pftgw;
using namespace pftgw::hl7v2;

// Aborts with the failed condition's line, so a crash names the broken invariant.
#define check(ok) check_at((ok), __LINE__)
void check_at(bool ok, int line) {
    if (ok) return;
    std::fprintf(stderr, "hl7_reader_fuzz: invariant at line %d failed\n", line);
    std::abort();
}

std::optional<int> fixed_offset(const std::string&, const LocalDateTime&) {
    return 60;  // any answer: the fuzzer looks for crashes, not zone rules
}

const DeviceProfile& profile() {
    static const DeviceProfile p = [] {
        DeviceProfile d;
        d.name = "fuzz";
        d.code_system = "FUZZ";
        d.time_zone = "Europe/Oslo";
        const char* codes[][2] = {{"F1", "FEV1"},     {"FVC", "FVC"},       {"F1P", "FEV1.pred"},
                                  {"F1Z", "FEV1.z"},  {"HT", "HEIGHT"},     {"TB", "AMB_TEMP"},
                                  {"PF^^99X", "PEF"}, {"BAD", "NOT_A_KIND"}};
        for (const auto& c : codes) {
            CodeMapping m;
            m.code = c[0];
            m.kind = c[1];
            d.codes.push_back(m);
        }
        CodeMapping vi;
        vi.code = "VIN";
        vi.kind = "VI";
        vi.trial_value = true;
        vi.override_sent = true;
        vi.unit = "L";
        vi.condition = GasCondition::atps;
        d.codes.push_back(vi);
        return d;
    }();
    return p;
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
    const std::string_view input(reinterpret_cast<const char*>(data), size);
    Hl7ReadOptions options;
    options.profile = &profile();
    options.resolve_offset = &fixed_offset;
    const Hl7ReadOutcome out = read_hl7(input, options);

    std::size_t last_end = 0;
    for (const ReadMessage& m : out.messages) {
        check(m.begin >= last_end && m.begin < m.end && m.end <= size);
        last_end = m.end;
        if (m.result) {
            check(m.parsed.has_value());
            check(m.result->findings == m.findings);
        }
        const std::string ack = acknowledge(m);
        if (!m.parsed) {
            check(ack.empty());
            continue;
        }
        const char sep = m.parsed->delimiters.field;
        check(ack.size() > 4 && ack.compare(0, 3, "MSH") == 0 && ack[3] == sep);
        check(ack.find(std::string("\rMSA") + sep) != std::string::npos);
        check(ack.find(sep + m.control_id + "\r") != std::string::npos);

        const Hl7ReadOutcome alone = read_hl7(input.substr(m.begin, m.end - m.begin), options);
        check(!alone.messages.empty() && alone.messages[0].control_id == m.control_id);
    }

    // The streaming splitter fed in pieces (pftgw convert reads files so)
    // hands over the very messages and file findings split_hl7 gives. The
    // piece size comes from the input's first byte: 1 to 256.
    const std::size_t piece = size ? static_cast<std::size_t>(data[0]) + 1 : 1;
    Hl7Splitter splitter;
    std::vector<MessageRange> pieces_ranges;
    const Hl7Splitter::MessageFn fn = [&](std::string_view bytes, std::size_t offset) {
        check(offset + bytes.size() <= size && input.substr(offset, bytes.size()) == bytes);
        pieces_ranges.push_back({offset, offset + bytes.size()});
    };
    for (std::size_t at = 0; at < size; at += piece) splitter.feed(input.substr(at, piece), fn);
    splitter.finish(fn);
    const std::vector<Finding> piece_findings = splitter.take_findings();
    check(pieces_ranges.size() == out.messages.size());
    for (std::size_t i = 0; i < pieces_ranges.size(); ++i)
        check(pieces_ranges[i].begin == out.messages[i].begin &&
              pieces_ranges[i].end == out.messages[i].end);
    check(piece_findings.size() == out.findings.size());
    for (std::size_t i = 0; i < piece_findings.size(); ++i)
        check(piece_findings[i].rule == out.findings[i].rule &&
              piece_findings[i].path == out.findings[i].path);

    const Hl7ReadOutcome again = read_hl7(input, options);
    check(again.messages.size() == out.messages.size());
    for (std::size_t i = 0; i < out.messages.size(); ++i)
        check(again.messages[i].result == out.messages[i].result &&
              again.messages[i].findings == out.messages[i].findings);
    return 0;
}

// Plain ASTM E1394 text (records ending in CR, no E1381 framing) cut into
// messages as it streams in: a message ends where the next H record begins
// ('H' then its field delimiter, at the start of a line). Memory holds one
// message and one piece, whatever the length of the text. Each message goes
// to read_e1394(); framed captures go through LinkReceiver instead.
#pragma once

#include <cstddef>
#include <functional>
#include <string>
#include <string_view>

namespace pftgw::astm {

class E1394Splitter {
public:
    using MessageFn = std::function<void(std::string_view text)>;
    void feed(std::string_view piece, const MessageFn& fn);
    void finish(const MessageFn& fn);  // the end: the rest is a message unless blank

private:
    std::string text_;         // what is not yet known to be a whole message
    std::size_t scanned_ = 0;  // where to look for line ends once more has come
};

}  // namespace pftgw::astm

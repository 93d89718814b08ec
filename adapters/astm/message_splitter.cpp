// See message_splitter.hpp.
#include "adapters/astm/message_splitter.hpp"

#include <cctype>

namespace pftgw::astm {

void E1394Splitter::feed(std::string_view piece, const MessageFn& fn) {
    text_.append(piece);
    std::size_t cut = 0;                     // text_ before it is handed over
    std::size_t resume = std::string::npos;  // a line end whose next line has not come yet
    for (std::size_t at = text_.find_first_of("\r\n", scanned_); at != std::string::npos;
         at = text_.find_first_of("\r\n", at + 1)) {
        if (at + 2 >= text_.size()) {
            resume = at;
            break;
        }
        const unsigned char delimiter = static_cast<unsigned char>(text_[at + 2]);
        if (text_[at + 1] == 'H' && !std::isalnum(delimiter) && delimiter > ' ') {
            fn(std::string_view(text_).substr(cut, at + 1 - cut));
            cut = at + 1;
        }
    }
    text_.erase(0, cut);  // once a piece: the rest moves once
    scanned_ = resume == std::string::npos ? text_.size() : resume - cut;
}

void E1394Splitter::finish(const MessageFn& fn) {
    if (text_.find_first_not_of("\r\n ") != std::string::npos) fn(text_);
    text_.clear();
    scanned_ = 0;
}

}  // namespace pftgw::astm

// Result<T>: a value or an Error, for the data path (no exceptions there).
// g++ 12 has no std::expected; this is the small stand-in DECISIONS.md asks for.
#pragma once

#include <cassert>
#include <string>
#include <utility>
#include <variant>

namespace pftgw {

struct Error {
    std::string code;     // stable machine-readable id, e.g. "xml.malformed"
    std::string message;  // what was seen and what was expected
    std::string where;    // file, path or field the error is about
    int line = 0;         // 1-based when known, else 0
    int column = 0;       // 1-based when known, else 0
};

template <class T>
class [[nodiscard]] Result {
public:
    Result(T value) : state_(std::move(value)) {}      // NOLINT: implicit by design
    Result(Error error) : state_(std::move(error)) {}  // NOLINT: implicit by design

    bool ok() const { return std::holds_alternative<T>(state_); }
    explicit operator bool() const { return ok(); }

    const T& value() const& {
        assert(ok());
        return std::get<T>(state_);
    }
    T& value() & {
        assert(ok());
        return std::get<T>(state_);
    }
    T&& value() && {
        assert(ok());
        return std::get<T>(std::move(state_));
    }
    const T& operator*() const& { return value(); }
    const T* operator->() const { return &value(); }

    const Error& error() const {
        assert(!ok());
        return std::get<Error>(state_);
    }

private:
    std::variant<T, Error> state_;
};

inline Error make_error(std::string code, std::string message, std::string where = {}) {
    return Error{std::move(code), std::move(message), std::move(where), 0, 0};
}

}  // namespace pftgw

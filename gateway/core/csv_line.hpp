// One line of a small CSV table (RFC 4180: quotes may hold commas and doubled
// quotes). For the compiled-in tables and `pftgw reference --csv`; archives
// use the streaming reader in adapters/csv.
#pragma once

#include <string>
#include <string_view>
#include <vector>

namespace pftgw {

std::vector<std::string> split_csv_line(std::string_view line);

}  // namespace pftgw

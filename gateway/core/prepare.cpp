// See prepare.hpp.
#include "gateway/core/prepare.hpp"

#include <algorithm>

#include "gateway/core/identity.hpp"
#include "gateway/core/normalize.hpp"

namespace pftgw {

bool prepare_result(NeutralResult& result, const PrepareOptions& options,
                    const QuantityTable& table) {
    normalize(result, table);
    assess_physiology(result, options.physiology);
    apply_reference_values(result, options.reference);
    // Always through result_identifier: a document's own id is made
    // filesystem-safe there, with a hash suffix so two ids never collide.
    result.id = result_identifier(result);
    for (Target t : options.targets) {
        for (Finding& f : validate(result, t, table)) {
            const bool seen =
                std::any_of(result.findings.begin(), result.findings.end(),
                            [&](const Finding& g) { return g.rule == f.rule && g.path == f.path; });
            if (!seen) result.findings.push_back(std::move(f));
        }
    }
    return !has_errors(result.findings);
}

}  // namespace pftgw

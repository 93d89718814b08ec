// The core steps between a reader and a writer, in one call, so the CLI, the
// daemon and the benchmarks run exactly the same sequence.
#pragma once

#include <vector>

#include "gateway/core/model.hpp"
#include "gateway/core/physiology/physiology.hpp"
#include "gateway/core/quantity_table.hpp"
#include "gateway/core/reference/reference_values.hpp"
#include "gateway/core/validate.hpp"

namespace pftgw {

struct PrepareOptions {
    std::vector<Target> targets;   // whose completeness rules apply
    ReferencePolicy reference;     // GLI reference values: none, fill or both
    PhysiologyOptions physiology;  // recomputation, grading, adjustments
};

// normalize (canonical units and conditions, derived quantities) ->
// physiology (recompute, grade, adjust where maneuvers are sent) ->
// reference values (per policy) -> stable identifier -> validation per target.
// Every step appends its findings to result.findings; returns true when the
// result has no error finding (it may be delivered).
bool prepare_result(NeutralResult& result, const PrepareOptions& options,
                    const QuantityTable& table);

}  // namespace pftgw

// Validation: completeness per target, plausibility, internal consistency.
#pragma once

#include <vector>

#include "gateway/core/model.hpp"
#include "gateway/core/quantity_table.hpp"

namespace pftgw {

// What a result is checked for. `neutral` checks only the model's own rules.
enum class Target { neutral, hl7v2, fhir };

// Checks a normalized result. Error findings block delivery to `target`;
// warnings travel with the result. Rule ids are listed in DEVELOPERS.md.
std::vector<Finding> validate(const NeutralResult& result, Target target,
                              const QuantityTable& table);

}  // namespace pftgw

// COHb and altitude adjustment factors.
#include "gateway/core/physiology/adjustments.hpp"

#include "gateway/core/physiology/dlco.hpp"

namespace pftgw::physiology {

double cohb_predicted_factor(double cohb_percent) {
    return (kCohbReferencePercentPlus100 - cohb_percent) / 100.0;
}

double cohb_measured_factor(double cohb_percent) {
    return 100.0 / (kCohbReferencePercentPlus100 - cohb_percent);
}

double inspired_po2_mmhg(double pressure_mmhg) {
    return kInspiredO2Fraction * (pressure_mmhg - kPh2oBodyMmHg);
}

double altitude_factor(double pio2_mmhg) {
    return 1.0 + kAltitudeSlopePerMmHg * (pio2_mmhg - kPio2SeaLevelMmHg);
}

}  // namespace pftgw::physiology

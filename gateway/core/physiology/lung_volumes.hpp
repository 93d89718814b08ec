// Lung volumes: the identities between TLC, FRC, RV, ERV, IC and VC, and the
// repeatability of FRC (lung-function-facts.md, "Lung volumes", flag M).
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace pftgw::physiology {

// Identities hold within 5 % of the sum plus 0.01 L for two parts rounded to
// 0.01 L: the 5 % is common practice for volumes from separate maneuvers (the
// same figure validate uses for TLC vs RV + VC), not a standard's number.
inline constexpr double kIdentityFraction = 0.05;
inline constexpr double kIdentityRoundingL = 0.01;
// FRC repeatability (flag M, from memory of ATS/ERS 2005): plethysmography at
// least 3 values within 5 %, washout / dilution at least 2 within 10 %, as
// (highest - lowest) / mean.
inline constexpr double kFrcPlethFraction = 0.05;
inline constexpr int kFrcPlethMinCount = 3;
inline constexpr double kFrcWashoutFraction = 0.10;
inline constexpr int kFrcWashoutMinCount = 2;

struct LungVolumes {
    std::optional<double> tlc_l, frc_l, rv_l, erv_l, ic_l, vc_l;
};

struct IdentityCheck {
    std::string identity;  // "TLC = FRC + IC"
    std::string whole;     // "TLC"
    double whole_l = 0;
    double sum_l = 0;  // of the parts
    double tolerance_l = 0;
    bool consistent = true;
};

// Every identity whose three volumes are all known: TLC = FRC + IC,
// TLC = RV + VC, FRC = RV + ERV, VC = IC + ERV.
std::vector<IdentityCheck> check_lung_volume_identities(const LungVolumes& v,
                                                        double fraction = kIdentityFraction,
                                                        double rounding_l = kIdentityRoundingL);

enum class FrcMethod { plethysmography, washout_dilution, unknown };
// From Test::method: "body-plethysmography" / "plethysmography"; anything with
// "washout" or "dilution"; else unknown.
FrcMethod frc_method_of(std::string_view method);

struct FrcRepeatability {
    int count = 0;
    double mean_l = 0;
    double spread_fraction = 0;  // (highest - lowest) / mean
    double limit_fraction = 0;
    int min_count = 0;
    bool repeatable = false;  // enough values and within the limit
};

// Empty when the method is unknown or there are no values.
std::optional<FrcRepeatability> frc_repeatability(const std::vector<double>& frc_l,
                                                  FrcMethod method);

}  // namespace pftgw::physiology

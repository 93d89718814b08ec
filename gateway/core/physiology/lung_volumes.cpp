// Lung-volume identities and FRC repeatability.
#include "gateway/core/physiology/lung_volumes.hpp"

#include <algorithm>
#include <cmath>
#include <numeric>

namespace pftgw::physiology {
namespace {

constexpr double kSlackL = 1e-9;  // floating point only

void check(std::vector<IdentityCheck>& out, const char* identity, const char* whole,
           std::optional<double> w, std::optional<double> a, std::optional<double> b,
           double fraction, double rounding_l) {
    if (!w || !a || !b) return;
    IdentityCheck c;
    c.identity = identity;
    c.whole = whole;
    c.whole_l = *w;
    c.sum_l = *a + *b;
    c.tolerance_l = fraction * c.sum_l + rounding_l;
    c.consistent = std::abs(c.whole_l - c.sum_l) <= c.tolerance_l + kSlackL;
    out.push_back(std::move(c));
}

}  // namespace

std::vector<IdentityCheck> check_lung_volume_identities(const LungVolumes& v, double fraction,
                                                        double rounding_l) {
    std::vector<IdentityCheck> out;
    check(out, "TLC = FRC + IC", "TLC", v.tlc_l, v.frc_l, v.ic_l, fraction, rounding_l);
    check(out, "TLC = RV + VC", "TLC", v.tlc_l, v.rv_l, v.vc_l, fraction, rounding_l);
    check(out, "FRC = RV + ERV", "FRC", v.frc_l, v.rv_l, v.erv_l, fraction, rounding_l);
    check(out, "VC = IC + ERV", "VC", v.vc_l, v.ic_l, v.erv_l, fraction, rounding_l);
    return out;
}

FrcMethod frc_method_of(std::string_view method) {
    std::string m(method);
    std::transform(m.begin(), m.end(), m.begin(), [](unsigned char c) { return std::tolower(c); });
    if (m.find("plethysmograph") != std::string::npos) return FrcMethod::plethysmography;
    if (m.find("washout") != std::string::npos || m.find("dilution") != std::string::npos)
        return FrcMethod::washout_dilution;
    return FrcMethod::unknown;
}

std::optional<FrcRepeatability> frc_repeatability(const std::vector<double>& frc_l,
                                                  FrcMethod method) {
    if (frc_l.empty() || method == FrcMethod::unknown) return std::nullopt;
    FrcRepeatability r;
    r.count = static_cast<int>(frc_l.size());
    r.mean_l = std::accumulate(frc_l.begin(), frc_l.end(), 0.0) / r.count;
    const auto [lo, hi] = std::minmax_element(frc_l.begin(), frc_l.end());
    r.spread_fraction = r.mean_l > 0 ? (*hi - *lo) / r.mean_l : 0.0;
    const bool pleth = method == FrcMethod::plethysmography;
    r.limit_fraction = pleth ? kFrcPlethFraction : kFrcWashoutFraction;
    r.min_count = pleth ? kFrcPlethMinCount : kFrcWashoutMinCount;
    r.repeatable = r.count >= r.min_count && r.spread_fraction <= r.limit_fraction + kSlackL;
    return r;
}

}  // namespace pftgw::physiology

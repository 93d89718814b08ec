// Invented example results for unit tests and benchmarks (no real patient data).
// `example_normalized_result()` is already in canonical units, as writers receive it.
#pragma once

#include <string>

#include "gateway/core/model.hpp"

namespace pftgw::testing {

inline Timestamp ts(int y, int mo, int d, int h, int mi, int s, int offset_minutes) {
    Timestamp t;
    t.date = Date{y, mo, d};
    t.hour = h;
    t.minute = mi;
    t.second = s;
    t.offset_minutes = offset_minutes;
    return t;
}

inline Quantity q(std::string kind, double value, std::string unit, GasCondition c) {
    Quantity out;
    out.kind = std::move(kind);
    out.value = value;
    out.unit = std::move(unit);
    out.condition = c;
    out.source.value_text = std::to_string(value);
    out.source.unit_text = out.unit;
    return out;
}

inline ReferenceValues ref(std::string set, double pred, double lln, double uln, double z,
                           double pct) {
    ReferenceValues r;
    r.equation_set = std::move(set);
    r.origin = Origin::device;
    r.predicted = pred;
    r.lln = lln;
    r.uln = uln;
    r.z_score = z;
    r.percent_predicted = pct;
    return r;
}

// One session with spirometry, lung volumes and DLCO: 25 reported quantities.
inline NeutralResult example_normalized_result(int n = 1) {
    NeutralResult r;
    r.id = "NORTHLAB-SPX7-" + std::to_string(100000 + n);
    r.device_session_number = std::to_string(100000 + n);
    r.session_time = ts(2026, 3, 14, 9, 12, 0, 60);
    r.subject.identifiers.push_back({"urn:oid:2.999.40.1", "H" + std::to_string(500000 + n), "MR"});
    r.subject.family_name = "Brandvold";
    r.subject.given_name = "Ines";
    r.subject.sex_at_birth = SexAtBirth::female;
    r.subject.administrative_gender = "female";
    r.subject.birth_date = Date{1968, 5, 21};
    r.subject.height = q("HEIGHT", 166, "cm", GasCondition::none);
    r.subject.weight = q("WEIGHT", 64, "kg", GasCondition::none);
    r.order.placer_number = "PL-" + std::to_string(7000 + n);
    r.order.accession_number = "ACC-" + std::to_string(9000 + n);
    r.device.id = "SPX7";
    r.device.manufacturer = "Northwind Respiratory";
    r.device.model = "Spirograph 7";
    r.device.serial_number = "SN-77-0192";
    r.device.software_version = "4.2.1";
    r.environment.temperature = q("AMB_TEMP", 22.0, "Cel", GasCondition::none);
    r.environment.pressure = q("PB", 100.8, "kPa", GasCondition::none);

    Test spiro;
    spiro.type = TestType::spirometry;
    spiro.time = ts(2026, 3, 14, 9, 15, 0, 60);
    auto fev1 = q("FEV1", 2.61, "L", GasCondition::btps);
    fev1.reference.push_back(ref("GLI Global 2022", 2.80, 2.10, 3.50, -0.52, 93));
    fev1.trials = {2};
    spiro.values.push_back(fev1);
    auto fvc = q("FVC", 3.40, "L", GasCondition::btps);
    fvc.reference.push_back(ref("GLI Global 2022", 3.45, 2.65, 4.25, -0.11, 99));
    spiro.values.push_back(fvc);
    auto ratio = q("FEV1_FVC", 0.768, "1", GasCondition::none);
    ratio.reference.push_back(ref("GLI Global 2022", 0.81, 0.70, 0.90, -0.85, 95));
    spiro.values.push_back(ratio);
    spiro.values.push_back(q("PEF", 6.10, "L/s", GasCondition::btps));
    spiro.values.push_back(q("FEF25_75", 2.05, "L/s", GasCondition::btps));
    spiro.values.push_back(q("FEF75", 0.61, "L/s", GasCondition::btps));
    spiro.values.push_back(q("FET", 8.4, "s", GasCondition::none));
    spiro.comments.push_back("Good effort; 3 acceptable maneuvers & no cough");
    r.tests.push_back(spiro);

    Test vols;
    vols.type = TestType::lung_volumes;
    vols.method = "body-plethysmography";
    vols.time = ts(2026, 3, 14, 9, 40, 0, 60);
    auto tlc = q("TLC", 5.10, "L", GasCondition::btps);
    tlc.reference.push_back(ref("GLI-2021", 5.20, 4.20, 6.20, -0.16, 98));
    vols.values.push_back(tlc);
    vols.values.push_back(q("VC", 3.45, "L", GasCondition::btps));
    vols.values.push_back(q("RV", 1.65, "L", GasCondition::btps));
    vols.values.push_back(q("FRC", 2.70, "L", GasCondition::btps));
    vols.values.push_back(q("ERV", 1.05, "L", GasCondition::btps));
    vols.values.push_back(q("IC", 2.40, "L", GasCondition::btps));
    vols.values.push_back(q("RV_TLC", 0.324, "1", GasCondition::none));
    r.tests.push_back(vols);

    Test dl;
    dl.type = TestType::diffusing_capacity;
    dl.method = "single-breath";
    dl.time = ts(2026, 3, 14, 10, 5, 0, 60);
    auto dlco = q("DLCO", 7.10, "mmol/min/kPa", GasCondition::stpd);
    dlco.reference.push_back(ref("GLI-2017", 7.60, 5.90, 9.50, -0.48, 93));
    dl.values.push_back(dlco);
    dl.values.push_back(q("VA", 4.80, "L", GasCondition::btps));
    dl.values.push_back(q("KCO", 1.48, "mmol/min/kPa/L", GasCondition::none));
    dl.values.push_back(q("VI", 3.30, "L", GasCondition::btps));
    dl.values.push_back(q("BHT", 10.2, "s", GasCondition::none));
    dl.values.push_back(q("HB", 12.9, "g/dL", GasCondition::none));
    dl.values.push_back(q("COHB", 1.2, "%", GasCondition::none));
    auto dlhb = q("DLCO_HB", 7.38, "mmol/min/kPa", GasCondition::stpd);
    dlhb.origin = Origin::gateway;
    dlhb.derived_from = {"DLCO", "HB"};
    dl.values.push_back(dlhb);
    r.tests.push_back(dl);

    Finding w;
    w.rule = "consistency.kco";
    w.severity = Severity::warning;
    w.path = "tests[2].values[KCO]";
    w.message = "KCO 1.48 differs from DLCO/VA = 1.479 | within rounding? ^check^";
    w.values = {{"KCO", "1.48"}, {"DLCO/VA", "1.479"}};
    r.findings.push_back(w);
    return r;
}

}  // namespace pftgw::testing

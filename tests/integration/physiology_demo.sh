#!/usr/bin/env bash
# The physiology engine end to end on the demo lab's sessions with maneuver
# data (samples/README.md, "Sessions with maneuver data"): `pftgw check
# --format json` gives the expected grades, failed criteria and mismatch
# warnings, `pftgw convert --to neutral-json` carries the adjusted quantities
# (origin gateway, the measured value kept), and HL7 / FHIR outputs are written.
# Usage: physiology_demo.sh PATH/TO/pftgw SOURCE_DIR
#
# Every expected number below is worked by hand in the comment beside it from
# the formulas of ../shared/reference/lung-function-facts.md (the facts file)
# and the values in the sample document; the facts file's flag is named
# (V found in the source, V2 secondary source only, M from memory, D derived).
set -uo pipefail
pftgw=$1
src=$2
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
cd "$src"
lab=samples/lab
passed=0
failed=0
ok() { passed=$((passed + 1)); }
bad() { failed=$((failed + 1)); echo "FAIL: $*"; }

# check_json FILE: `pftgw check --format json FILE` into $work/check.json; exit status in $rc.
check_json() {
  "$pftgw" check --format json "$1" > "$work/check.json"
  rc=$?
}

# q EXPR: evaluates a Python expression over the findings of the one result in
# $work/check.json (`F` = list of findings; helpers `rule(r)`, `val(f, name)`,
# `vals(f, name)`); prints the value.
q() {
  python3 - "$work/check.json" "$1" << 'EOF'
import json, sys
doc = json.load(open(sys.argv[1]))
F = doc["results"][0]["findings"]
def rule(r): return [f for f in F if f["rule"] == r]
def val(f, name):
    for v in f.get("values", []):
        if v["name"] == name: return v["value"]
    return None
def vals(f, name): return [v["value"] for v in f.get("values", []) if v["name"] == name]
print(eval(sys.argv[2]))
EOF
}

# expect WHAT GOT WANT
expect() { if [ "$2" = "$3" ]; then ok; else bad "$1: got '$2', expected '$3'"; fi; }
# near WHAT GOT WANT TOL: |GOT - WANT| <= TOL
near() {
  if python3 -c "import sys; sys.exit(0 if abs(float('$2') - float('$3')) <= float('$4') else 1)" 2> /dev/null; then ok
  else bad "$1: got '$2', expected $3 +/- $4"; fi
}

# ---- (a) three grade-A DLCO maneuvers, repeatable, device values follow from its data ----
f=$lab/2026-03-20-castellow-dlco-maneuvers.json
check_json "$f"
expect "$f exit" "$rc" 0
# Grades, facts file "DLCO acceptability, repeatability, grade" (V2; the
# ERS/ATS 2017 grading table itself was not available): A needs VI/VC >= 0.90,
# breath-hold 8-12 s (ATS/ERS 2005 text, V), sample collection <= 4 s.
# VI/VC: 3.80 / 4.01 = 0.948, 3.76 / 4.01 = 0.938, 3.83 / 4.01 = 0.955 (FVC of the
# session's spirometry). Breath-hold by Jones-Meade (facts file, M): from 30 % of
# the inspiratory time, 0.3 x 2.0 = 0.6 s, to the middle of the sample:
# (10.1 + 11.1) / 2 - 0.6 = 10.0 s; (10.3 + 11.3) / 2 - 0.6 = 10.2 s; (9.9 + 10.9) / 2 - 0.6 = 9.8 s.
# Sample 11.1 - 10.1 = 1.0 s. So every maneuver is A and the session (best) is A.
expect "$f session grade" "$(q 'val(rule("quality.grade")[0], "DLCO")')" A
expect "$f maneuver grades" "$(q '",".join(val(x, "grade") for x in rule("quality.dlco.maneuver"))')" A,A,A
expect "$f nothing failed" "$(q 'sum(len(vals(x, "failed")) for x in rule("quality.dlco.maneuver"))')" 0
# Recomputed DLCO of maneuver 1, facts file "Single-breath DLCO calculation" (M):
# VD = 0.150 + 2.2 mL/kg x 66 kg = 0.2952 L; VA = (3.80 - 0.2952) x 0.003 / 0.001984 = 5.2996 L BTPS;
# PB 101.2 kPa / 0.133322 = 759.06 mmHg; BTPS->STPD (facts "Gas conditions", D)
# = (759.06 - 47) / 760 x 273.15 / 310.15 = 0.93692 x 0.88070 = 0.82515, VA STPD 4.3730 L;
# FA,CO,0 = 0.003 x 0.001984 / 0.003 = 0.001984; ln(0.001984 / 0.000996) = 0.68912;
# DLCO = 4.3730 x 60000 / (10.0 x 712.06) x 0.68912 = 25.39 mL/min/mm[Hg].
m1=$(q 'val([x for x in rule("dlco.recomputed") if val(x, "trial") == "1"][0], "DLCO.recomputed")')
near "$f maneuver 1 recomputed DLCO" "$m1" 25.39 0.02
m1va=$(q 'val([x for x in rule("dlco.recomputed") if val(x, "trial") == "1"][0], "VA.recomputed")')
near "$f maneuver 1 recomputed VA" "$m1va" 5.300 0.001
# The device sent 8.50 mmol/min/kPa x 2.987 = 25.39: no mismatch (tolerance 10 %).
expect "$f no mismatch" "$(q 'len(rule("dlco.recompute-mismatch")) + len(rule("dlco.va-mismatch"))')" 0
# Repeatability (facts file, V2): the two highest, 8.68 and 8.50 mmol/min/kPa,
# x 2.987 = 25.93 and 25.39, differ by 0.54 <= 2 mL/min/mm[Hg].
expect "$f repeatable" "$(q 'rule("quality.dlco.repeatability")[0]["severity"]')" info
near "$f spread" "$(q 'val(rule("quality.dlco.repeatability")[0], "spread_mL/min/mm[Hg]")')" 0.538 0.001
# The reported 8.49 is the mean of 8.50, 8.30, 8.68 (8.493): no reported-mismatch.
expect "$f reported is the mean" "$(q 'len(rule("dlco.reported-mismatch"))')" 0

# ---- (b) maneuvers that fail a criterion ----
f=$lab/2026-03-20-quist-dlco-maneuvers.xml
check_json "$f"
expect "$f exit" "$rc" 0
# Maneuver 2: T_INSP_30 0.6 s sent, sample 7.5-8.5 s: breath-hold 8.0 - 0.6 = 7.4 s < 8 s
# (facts file, V 2005 / V2 2017); VI/VC 3.05 / 3.30 = 0.924 >= 0.80, sample 1.0 s <= 5 s: grade D (V2).
# Maneuver 3: VI/VC 2.706 / 3.30 = 0.820: below 0.85, at least 0.80; breath-hold
# (10.4 + 11.4) / 2 - 0.6 = 10.3 s: grade C (V2).
g() { q "[(val(x, 'grade'), ','.join(vals(x, 'failed'))) for x in rule('quality.dlco.maneuver') if val(x, 'trial') == '$1'][0]"; }
expect "$f maneuver 1" "$(g 1)" "('A', '')"
expect "$f maneuver 2 breath-hold" "$(g 2)" "('D', 'breath-hold')"
expect "$f maneuver 3 VI/VC" "$(g 3)" "('C', 'vi-vc')"
expect "$f maneuver 4" "$(g 4)" "('A', '')"
expect "$f maneuver 2 BHT" "$(q '[val(x, "BHT") for x in rule("quality.dlco.maneuver") if val(x, "trial") == "2"][0]')" 7.4
expect "$f session grade (best maneuver)" "$(q 'val(rule("quality.grade")[0], "DLCO")')" A
# The reported 7.20 mmol/min/kPa is the mean of the acceptable maneuvers 1 and 4
# ((7.09 + 7.30) / 2 = 7.195), 2 and 3 left out (facts file "reported value", V2).
expect "$f reported is the mean of 1 and 4" "$(q 'len(rule("dlco.reported-mismatch"))')" 0
expect "$f repeatable" "$(q 'rule("quality.dlco.repeatability")[0]["severity"]')" info

# ---- (c) a sent DLCO that does not follow from its own maneuver ----
f=$lab/2026-03-23-ilvesson-dlco-maneuvers.xml
check_json "$f"
# Warnings travel with the result: exit 0 (DECISIONS.md exit statuses).
expect "$f exit" "$rc" 0
# Maneuver 1, facts file "Single-breath DLCO calculation" (M):
# VD = 0.120 + 0.135 = 0.255 L; VA = (2.62 - 0.255) x 0.10 / 0.05375 = 4.4000 L BTPS;
# PB 100.9 / 0.133322 = 756.81 mmHg; BTPS->STPD (709.81 / 760) x (273.15 / 310.15)
# = 0.93396 x 0.88070 = 0.82254; VA STPD 3.6192 L; FA,CO,0 = 0.003 x 0.05375 / 0.10
# = 0.0016125; ln(0.0016125 / 0.000841) = 0.65094; breath-hold (10.1 + 11.1) / 2 - 0.6 = 10.0 s;
# DLCO = 3.6192 x 60000 / (10.0 x 709.81) x 0.65094 = 19.91 mL/min/mm[Hg]. The device
# sent 24.2 = 19.91 / 0.82254 (its VA left at BTPS): 24.2 / 19.91 = 1.215 > 1.10.
msg=$(q '[x["message"] for x in rule("dlco.recompute-mismatch") if x["path"] == "tests[1].trials[0].values[DLCO]"][0]')
case "$msg" in *"DLCO sent 24.2, recomputed from your maneuver 19.9 mL/min/mm[Hg]"*) ok ;; *) bad "$f mismatch message: $msg" ;; esac
case "$msg" in *"1 / the BTPS-to-STPD factor 0.8225"*) ok ;; *) bad "$f mismatch names no cause: $msg" ;; esac
near "$f recomputed 1" "$(q '[val(x, "DLCO.recomputed") for x in rule("dlco.recompute-mismatch") if val(x, "trial") == "1"][0]')" 19.91 0.02
expect "$f sent 1" "$(q '[val(x, "DLCO.sent") for x in rule("dlco.recompute-mismatch") if val(x, "trial") == "1"][0]')" 24.2
# Maneuver 2: VA = (2.60 - 0.255) x 0.10 / 0.05378 = 4.3604 L, VA STPD 3.5866 L;
# ln(0.003 x 0.5378 / 0.000824) = ln(1.95801) = 0.67193; breath-hold 11.0 - 0.6 = 10.4 s;
# DLCO = 3.5866 x 60000 / (10.4 x 709.81) x 0.67193 = 19.59; sent 23.8.
near "$f recomputed 2" "$(q '[val(x, "DLCO.recomputed") for x in rule("dlco.recompute-mismatch") if val(x, "trial") == "2"][0]')" 19.59 0.02
# The reported 24.0 (mean of 24.2 and 23.8) against the recomputed mean (19.91 + 19.59) / 2 = 19.75.
msg=$(q '[x["message"] for x in rule("dlco.recompute-mismatch") if x["path"] == "tests[1].values[DLCO]"][0]')
case "$msg" in *"reported DLCO 24.0 mL/min/mm[Hg]"*"their mean is 19.8 mL/min/mm[Hg]"*) ok ;; *) bad "$f reported mismatch: $msg" ;; esac
expect "$f mismatch severity" "$(q '",".join(sorted(set(x["severity"] for x in rule("dlco.recompute-mismatch"))))')" warning
expect "$f VA agrees" "$(q 'len(rule("dlco.va-mismatch"))')" 0

# ---- (d) spirometry, grade A for FEV1 and FVC ----
f=$lab/2026-03-24-brennigan-spirometry-trials.json
check_json "$f"
expect "$f exit" "$rc" 0
# ATPS -> BTPS at 22.0 C, 101.2 kPa (facts file "Gas conditions"; PH2O(22 C)
# 2.6447 kPa, CRC, V): (101.2 - 2.6447) / (101.2 - 6.266) x 310.15 / 295.15 = 1.0909
# (the facts table's 1.091 at 760 mmHg, D). FEV1 3290 - 3250 mL = 40 mL ATPS = 0.044 L BTPS,
# FVC 4240 - 4210 = 30 mL = 0.033 L: within 0.150 L with 3 acceptable trials: A
# (ATS/ERS 2019 Table 10, facts file, V). BEV at most 95 mL ATPS = 0.104 L < 5 % of
# FVC (0.23 L); last-second volume at most 18 mL = 0.020 L < 0.025 L (V2).
expect "$f grades" "$(q '(val(rule("quality.grade")[0], "FEV1"), val(rule("quality.grade")[0], "FVC"))')" "('A', 'A')"
near "$f FEV1 spread" "$(q '[val(x, "spread_L") for x in rule("quality.spirometry.repeatability") if val(x, "kind") == "FEV1"][0]')" 0.0436 0.0005
expect "$f all acceptable" "$(q '[val(x, "FVC.acceptable") for x in rule("quality.spirometry.trial")]')" "['true', 'true', 'true']"
expect "$f reported is largest" "$(q 'len(rule("spirometry.reported-not-largest"))')" 0

# ---- (e) not repeatable: FEV1 C, FVC D ----
f=$lab/2026-03-24-andersby-spirometry-not-repeatable.xml
check_json "$f"
expect "$f exit" "$rc" 0
# FEV1 2.46 - 2.28 = 0.180 L: over 0.150, within 0.200: C; FVC 3.04 - 2.81 = 0.230 L:
# over 0.200, within 0.250: D (ATS/ERS 2019 Table 10, facts file, V).
expect "$f grades" "$(q '(val(rule("quality.grade")[0], "FEV1"), val(rule("quality.grade")[0], "FVC"))')" "('C', 'D')"
expect "$f repeatability warnings" "$(q '[x["severity"] for x in rule("quality.spirometry.repeatability")]')" "['warning', 'warning']"

# ---- (e) a trial with too large a back-extrapolated volume ----
f=$lab/2026-03-25-ainsley-spirometry-bev.json
check_json "$f"
expect "$f exit" "$rc" 0
# Trial 2: BEV 0.32 L, limit the greater of 5 % x 4.66 = 0.233 L and 0.100 L (facts
# file, V2): not usable. Trials 1 and 3: FEV1 3.62 - 3.58 = 0.04 L, FVC 4.72 - 4.68
# = 0.04 L, 2 acceptable within 0.150 L: B (Table 10, V).
expect "$f trial 2 failed" "$(q '[(val(x, "FEV1.usable"), vals(x, "failed")) for x in rule("quality.spirometry.trial") if val(x, "trial") == "2"][0]')" "('false', ['bev'])"
expect "$f grades" "$(q '(val(rule("quality.grade")[0], "FEV1"), val(rule("quality.grade")[0], "FVC"))')" "('B', 'B')"
# The device reported trial 2's FEV1 3.79 L; the largest acceptable is 3.62 L (trial 3).
expect "$f reported-not-largest" "$(q '[(val(x, "FEV1"), val(x, "FEV1.largest"), val(x, "trial")) for x in rule("spirometry.reported-not-largest")]')" "[('3.79', '3.62', '3')]"

# ---- (f) adjustments: Hb and COHb; altitude ----
"$pftgw" convert --quiet --to neutral-json --out "$work/nj" \
  $lab/2026-03-26-delacorte-dlco-hb-cohb.json $lab/2026-03-27-mbeki-dlco-altitude.xml
expect "convert neutral-json exit" "$?" 0
# adj FILE KIND: "value origin derivedFrom" of KIND in the DLCO test.
adj() {
  python3 - "$work/nj/$1" "$2" << 'EOF'
import json, sys
d = json.load(open(sys.argv[1]))
t = [t for t in d["tests"] if t["type"] == "diffusing-capacity"][0]
v = [v for v in t["values"] if v["kind"] == sys.argv[2]]
print(f'{v[0].get("value")} {v[0].get("origin", "device")} {",".join(v[0].get("derivedFrom", []))}' if v else "absent")
EOF
}
read -r v o from <<< "$(adj KVH-DLX2-D0530.json DLCO_HB)"
# Cotes (facts file "Adjustments", V2): male 76 y, Hbref 14.6 g/dL; Hb 118 g/L = 11.8 g/dL;
# 4.33 x (11.8 + 0.7 x 14.6) / (1.7 x 11.8) = 4.33 x 22.02 / 20.06 = 4.753 mmol/min/kPa.
near "DLCO_HB value" "$v" 4.753 0.001
expect "DLCO_HB origin, derivedFrom" "$o $from" "gateway DLCO,HB"
read -r v o from <<< "$(adj KVH-DLX2-D0530.json DLCO_COHB)"
# COHb (facts file, M: predicted x (102 % - COHb %), so measured x 100 / (102 - COHb)):
# 4.33 x 100 / (102 - 3.6) = 4.33 / 0.984 = 4.400 mmol/min/kPa.
near "DLCO_COHB value" "$v" 4.400 0.001
expect "DLCO_COHB origin, derivedFrom" "$o $from" "gateway DLCO,COHB"
# The measured DLCO is kept as sent.
read -r v o from <<< "$(adj KVH-DLX2-D0530.json DLCO)"
expect "measured DLCO kept" "$v $o" "4.33 device"
# Sea level (101.6 kPa = 762 mmHg, PIO2 = 0.21 x 715 = 150.2 mmHg): no altitude adjustment.
expect "no DLCO_ALT at sea level" "$(adj KVH-DLX2-D0530.json DLCO_ALT)" absent
read -r v o from <<< "$(adj KVH-DLX2-D0541.json DLCO_ALT)"
# Altitude (facts file, M): PB 84.0 kPa / 0.133322 = 630.05 mmHg; PIO2 = 0.21 x (630.05 - 47)
# = 122.44 mmHg; 12.04 x (1 + 0.0031 x (122.44 - 150)) = 12.04 x 0.91457 = 11.011 mmol/min/kPa.
near "DLCO_ALT value" "$v" 11.011 0.001
expect "DLCO_ALT origin, derivedFrom" "$o $from" "gateway DLCO,PB"
read -r v o from <<< "$(adj KVH-DLX2-D0541.json DLCO)"
expect "measured DLCO kept at altitude" "$v $o" "12.04 device"
check_json $lab/2026-03-27-mbeki-dlco-altitude.xml
expect "altitude grade" "$(q 'val(rule("quality.grade")[0], "DLCO")')" A
check_json $lab/2026-03-26-delacorte-dlco-hb-cohb.json
expect "Hb/COHb session grade" "$(q 'val(rule("quality.grade")[0], "DLCO")')" A

# ---- the other outputs: every new session converts; the mismatch travels to HL7 ----
new=$(ls $lab/2026-03-2[0-7]-*-{dlco-maneuvers,dlco-hb-cohb,dlco-altitude,spirometry-trials,spirometry-not-repeatable,spirometry-bev}.* 2> /dev/null)
expect "eight new sessions" "$(echo "$new" | wc -l)" 8
for to in hl7v2 fhir-json neutral-json; do
  "$pftgw" convert --quiet --to "$to" --out "$work/out-$to" $new; rc=$?
  expect "convert --to $to exit" "$rc" 0
  expect "convert --to $to result files" "$(ls "$work/out-$to" | grep -c "^KVH-")" 8
done
# HL7 v2: the adjusted values are their own OBX (LOINC 19913-3 for Hb, facts file
# "Codes"; the project's code for COHb and altitude); the mismatch is an NTE.
grep -q 'OBX|[0-9]*|NM|19913-3^' "$work/out-hl7v2/KVH-DLX2-D0530.hl7" && ok || bad "HL7: no DLCO_HB OBX (19913-3)"
grep -q 'OBX|[0-9]*|NM|DLCO_COHB^' "$work/out-hl7v2/KVH-DLX2-D0530.hl7" && ok || bad "HL7: no DLCO_COHB OBX"
grep -q 'OBX|[0-9]*|NM|DLCO_ALT^' "$work/out-hl7v2/KVH-DLX2-D0541.hl7" && ok || bad "HL7: no DLCO_ALT OBX"
grep -q 'DLCO sent 24.2, recomputed from your maneuver 19.9' "$work/out-hl7v2/KVH-DLX1-88210.hl7" && ok || bad "HL7: mismatch warning not in an NTE"
# The grades and failed criteria reach the receivers as text (HL7 NTE, FHIR note).
grep -q 'DLCO session grade A' "$work/out-hl7v2/KVH-DLX2-D0502.hl7" && ok || bad "HL7: no DLCO grade note"
grep -q 'DLCO maneuver 2: grade D, not acceptable: breath-hold time 7.4 s outside 8-12 s' "$work/out-hl7v2/KVH-DLX2-D0502.hl7" && ok || bad "HL7: no failed breath-hold note"
grep -q 'spirometry grade FEV1 C, FVC D' "$work/out-hl7v2/KVH-BOX2-3460.hl7" && ok || bad "HL7: no spirometry grade note"
grep -q 'DLCO session grade A' "$work/out-fhir-json/KVH-DLX2-D0502.json" && ok || bad "FHIR: no DLCO grade note"
grep -q 'spirometry grade FEV1 C, FVC D' "$work/out-fhir-json/KVH-BOX2-3460.json" && ok || bad "FHIR: no spirometry grade note"
# FHIR: the adjusted Observation names what it was derived from.
python3 - "$work/out-fhir-json/KVH-DLX2-D0541.json" << 'EOF' && ok || bad "FHIR: DLCO_ALT Observation without derivedFrom"
import json, sys
b = json.load(open(sys.argv[1]))
obs = [e["resource"] for e in b["entry"] if e["resource"]["resourceType"] == "Observation"]
alt = [o for o in obs if any(c.get("code") == "DLCO_ALT" for c in o["code"]["coding"])]
sys.exit(0 if alt and alt[0].get("derivedFrom") else 1)
EOF

# ---- the whole lab: the new sessions add no error; exit 3 stays the malformed samples' ----
"$pftgw" check --format json $lab > "$work/lab.json"; rc=$?
expect "check of the lab exit" "$rc" 3
errs=$(python3 - "$work/lab.json" << 'EOF'
import json, sys
d = json.load(open(sys.argv[1]))
print(sum(r.get("errors", 0) for r in d["results"] if "/2026-03-2" in r["source"]))
EOF
)
expect "errors in the new sessions" "$errs" 0

echo "physiology demo: $passed passed, $failed failed"
[ "$failed" -eq 0 ]

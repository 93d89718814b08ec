#!/usr/bin/env bash
# pftgw reference, the real binary: one subject's printed values against
# published GLI values, a --csv run with good, bad and out-of-range rows, and
# the exit statuses (0 ok, 1 a row failed, 2 usage, 3 unreadable file).
# Usage: reference_cli.sh PATH/TO/pftgw SOURCE_DIR
set -uo pipefail
pftgw=$1
src=$2
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
cd "$src"
passed=0
failed=0
ok() { passed=$((passed + 1)); }
bad() { failed=$((failed + 1)); echo "FAIL: $*"; }

# field NAME FILE: the value printed as "NAME: value".
field() { sed -n "s/^$1: //p" "$2"; }
expect_field() {
  local name=$1 want=$2 file=$3
  local got
  got=$(field "$name" "$file")
  if [ "$got" = "$want" ]; then ok; else bad "$name: got '$got', expected '$want'"; cat "$file"; fi
}
expect_status() {
  local want=$1 got=$2 what=$3
  if [ "$got" -eq "$want" ]; then ok; else bad "$what: exit $got, expected $want"; fi
}

# GLI web calculator output (issue 5): GLI-2017 TLCO SI, female, 57 y, 190 cm:
# 8.625 / 6.651 / 11.014 mmol/min/kPa (3 decimals).
"$pftgw" reference --set gli-2017 --quantity TLCO --units si --sex F --age 57 --height 190 > "$work/tlco.txt"
expect_status 0 $? "TLCO single subject"
expect_field predicted 8.625 "$work/tlco.txt"
expect_field lln 6.651 "$work/tlco.txt"
expect_field uln 11.014 "$work/tlco.txt"
grep -q "^equation set: GLI-2017" "$work/tlco.txt" && ok || bad "equation set not named"
grep -q "licensed staff" "$work/tlco.txt" && ok || bad "no caution line"

# The pft R package "diffusion-capacity" vignette: GLI-2017 male 45 y 178 cm,
# DLCO 30.3 / 23.4 / 38.3 mL/min/mm[Hg] (1 decimal): round what is printed.
"$pftgw" reference --set gli-2017 --quantity dlco --units traditional --sex M --age 45 --height 178 > "$work/dlco.txt"
expect_status 0 $? "DLCO traditional"
for pair in predicted=30.3 lln=23.4 uln=38.3; do
  name=${pair%%=*}
  want=${pair#*=}
  got=$(printf '%.1f' "$(field "$name" "$work/dlco.txt")")
  [ "$got" = "$want" ] && ok || bad "DLCO $name rounds to $got, expected $want"
done

# GLI web calculator output (issue 5): GLI-2012 Other/mixed male 57 y 150 cm,
# FEV1 2.362 / 1.796 / 2.899 L; with a value, z and percent predicted appear.
"$pftgw" reference --set gli-2012 --group other --quantity FEV1 --sex M --age 57 --height 150 --value 2.362 > "$work/fev1.txt"
expect_status 0 $? "FEV1 with value"
expect_field predicted 2.362 "$work/fev1.txt"
expect_field lln 1.796 "$work/fev1.txt"
expect_field uln 2.899 "$work/fev1.txt"
# Measured at the predicted value: z about 0, percent predicted about 100 (LMS definition).
z=$(field z "$work/fev1.txt")
case "$z" in -0.00*|0.00*) ok ;; *) bad "z at predicted is $z" ;; esac
case "$(field percent_predicted "$work/fev1.txt")" in 100.0|99.9|100.1) ok ;; *) bad "percent predicted"; cat "$work/fev1.txt" ;; esac

# Out of range: refused with a message, exit 1, no values printed.
"$pftgw" reference --set gli-2021 --quantity TLC --sex F --age 81 --height 170 > "$work/out.txt" 2> "$work/err.txt"
expect_status 1 $? "out of range"
grep -q "outside" "$work/err.txt" && ok || bad "no out-of-range message"
[ -z "$(field predicted "$work/out.txt")" ] && ok || bad "a value was printed out of range"

# --csv: a good row (GLI web calculator: GLI-2021 TLC female 57 y 190 cm
# 7.276 / 5.906 / 8.799 L), a row with text for age, an out-of-range row and a
# row without a value; the run goes on past the bad rows and exits 1.
cat > "$work/in.csv" <<'CSV'
id,sex,age,height_cm,value
a,F,57,190,7.276
b,F,fifty,190,7.0
c,M,4,110,2.0
d,M,40,180,
CSV
"$pftgw" reference --set gli-2021 --quantity TLC --csv "$work/in.csv" > "$work/out.csv" 2> "$work/csv_err.txt"
expect_status 1 $? "csv with a bad row"
head -1 "$work/out.csv" | grep -qx "id,sex,age,height_cm,value,predicted,lln,uln,z,percent_predicted,error" && ok || bad "csv header: $(head -1 "$work/out.csv")"
[ "$(wc -l < "$work/out.csv")" -eq 5 ] && ok || bad "csv rows: $(wc -l < "$work/out.csv")"
grep -q "^a,F,57,190,7.276,7.276,5.906,8.799,0.000,100.0,$" "$work/out.csv" && ok || bad "csv good row"
grep -q "^b,F,fifty,190,7.0,,,,,,age 'fifty' is not a number$" "$work/out.csv" && ok || bad "csv bad row"
grep -q "^c,M,4,110,2.0,,,,,,.*outside GLI-2021 TLC (5-80 y)" "$work/out.csv" && ok || bad "csv out-of-range row"
grep -q "^d,M,40,180,,[0-9.]*,[0-9.]*,[0-9.]*,,,$" "$work/out.csv" && ok || bad "csv row without value"
grep -q "licensed staff" "$work/csv_err.txt" && ok || bad "csv: no caution"
if [ "$failed" -ne 0 ]; then cat "$work/out.csv"; fi

# A file of good rows only exits 0.
printf 'sex,age,height_cm\nM,45,178\n' > "$work/good.csv"
"$pftgw" reference --set gli-global-2022 --quantity FEV1 --csv "$work/good.csv" > "$work/good_out.csv"
expect_status 0 $? "csv all good"

# Usage (2) and unreadable file (3).
"$pftgw" reference --set gli-2019 --quantity FEV1 --sex M --age 40 --height 180 2> /dev/null
expect_status 2 $? "unknown set"
"$pftgw" reference --set gli-global-2022 --quantity FEF25-75 --sex M --age 40 --height 180 2> /dev/null
expect_status 2 $? "quantity not in set"
"$pftgw" reference --set gli-2012 --quantity FEV1 --sex M --age 40 --height 180 2> /dev/null
expect_status 2 $? "gli-2012 without group"
"$pftgw" reference --set gli-2021 --quantity TLC --csv "$work/in.csv" --sex M > /dev/null 2>&1
expect_status 2 $? "--csv with --sex"
"$pftgw" reference --set gli-2021 --quantity TLC --csv "$work/missing.csv" 2> /dev/null
expect_status 3 $? "missing file"
printf 'name,weight\nx,1\n' > "$work/nohead.csv"
"$pftgw" reference --set gli-2021 --quantity TLC --csv "$work/nohead.csv" > /dev/null 2>&1
expect_status 3 $? "csv without the needed columns"

echo "reference_cli: $passed passed, $failed failed"
[ "$failed" -eq 0 ]

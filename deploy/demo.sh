#!/usr/bin/env bash
# The demo: installs what is missing, builds, and runs pftgw over the invented
# demo lab in samples/lab/ (see samples/README.md): a check, then conversions
# to HL7 v2.5.1, FHIR R4 JSON and normalized neutral JSON in out/demo/.
set -uo pipefail
here=$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)
bash "$here/deploy/install-deps.sh" || exit 1
bash "$here/deploy/build.sh" || exit 1

pftgw="$here/build/pftgw"
out="$here/out/demo"
rm -rf "$out"
mkdir -p "$out"
cd "$here"

echo
echo "== pftgw check samples/lab   (some sessions are bad on purpose: samples/README.md)"
"$pftgw" check samples/lab > "$out/check.txt"
echo "   exit status $? (expected 3 here: the bad-schema-* samples cannot be read at all; 1 = errors, 0 = clean)"
echo "   full report: out/demo/check.txt"
tail -n 3 "$out/check.txt" | sed 's/^/   /'

for to in hl7v2 fhir-json neutral-json; do
  echo
  echo "== pftgw convert --to $to --out out/demo/$to samples/lab"
  "$pftgw" convert --to "$to" --out "$out/$to" samples/lab > "$out/convert-$to.txt" 2> "$out/convert-$to.blocked.txt"
  echo "   exit status $? (expected 3: unreadable bad samples; blocked results and their findings: out/demo/convert-$to.blocked.txt)"
  grep -E '^read ' "$out/convert-$to.txt" | sed 's/^/   /'
done

echo
echo "== pftgw convert --to hl7v2 --units traditional --out out/demo/hl7v2-traditional samples/lab"
"$pftgw" convert --to hl7v2 --units traditional --out "$out/hl7v2-traditional" samples/lab > "$out/convert-hl7v2-traditional.txt" 2>/dev/null
grep -E '^read ' "$out/convert-hl7v2-traditional.txt" | sed 's/^/   /'

echo
echo "== the 2019 archive re-expressed with GLI: pftgw convert --to neutral-json --reference both --out out/demo/gli samples/lab/archive-2019.jsonl"
"$pftgw" convert --to neutral-json --reference both --out "$out/gli" samples/lab/archive-2019.jsonl > "$out/convert-gli.txt" 2>&1
grep -E '^read ' "$out/convert-gli.txt" | sed 's/^/   /'
echo "   each FEV1 now carries the device's own predicted values and the gateway's GLI Global 2022 ones, each naming its equation set"

profile=samples/profiles/aldercrest-flowquill-3.toml
echo
echo "== a device's own exports, read through its profile ($profile):"
echo "   the same invented session as ASTM E1394 records, as HL7 v2.3 ORU from the device, and as a row of its CSV archive"
for pair in astm:samples/exports/spx3-ilvesson-2026-03-20.astm hl7v2:samples/exports/spx3-ilvesson-2026-03-20.hl7 \
            csv:samples/exports/spx3-archive-2026-03.csv; do
  from=${pair%%:*}
  file=${pair#*:}
  echo "   pftgw convert --from $from --profile \$profile --to fhir-json --out out/demo/device-$from $file"
  "$pftgw" convert --from "$from" --profile "$profile" --to fhir-json --out "$out/device-$from" "$file" \
    > "$out/convert-device-$from.txt" 2>&1
  grep -E '^read ' "$out/convert-device-$from.txt" | sed 's/^/     /'
done
echo "   check a raw export as a device maker would: pftgw check --from astm --profile $profile samples/exports/spx3-ilvesson-2026-03-20.astm"
"$pftgw" check --from astm --profile "$profile" samples/exports/spx3-ilvesson-2026-03-20.astm > "$out/check-device-astm.txt"
echo "     exit status $?; report: out/demo/check-device-astm.txt"
head -n 1 "$out/check-device-astm.txt" | sed 's/^/     /'

echo
echo "== pftgw reference --set gli-2017 --quantity DLCO --units traditional --sex M --age 45 --height 178"
"$pftgw" reference --set gli-2017 --quantity DLCO --units traditional --sex M --age 45 --height 178 | sed 's/^/   /'

first=$(ls "$out/hl7v2" | head -n 1)
if [ -n "$first" ]; then
  echo
  echo "== one HL7 message, out/demo/hl7v2/$first (segments shown one per line):"
  tr '\r' '\n' < "$out/hl7v2/$first" | head -n 12 | cut -c1-150 | sed 's/^/   /'
  echo "   ..."
fi
echo
echo "Outputs: $out"
echo "pftgw moves and checks results; it does not diagnose. Interpretation belongs to licensed staff and local rules."

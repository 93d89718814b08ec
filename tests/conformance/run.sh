#!/usr/bin/env bash
# Outside-reference checks of what pftgw writes (interop-facts.md, last table):
# converts the demo lab and the worked examples, then runs each checker.
# Usage: tests/conformance/run.sh PATH/TO/pftgw
set -uo pipefail
pftgw=$(realpath "${1:?usage: run.sh PATH/TO/pftgw}")
here=$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)
root=$(cd "$here/../.." && pwd)
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT

need_node="20.19.0"
have_node=$(node --version 2>/dev/null | tr -d v)
if [ -z "$have_node" ] || [ "$(printf '%s\n%s\n' "$need_node" "$have_node" | sort -V | head -n1)" != "$need_node" ]; then
  echo "conformance: Node $need_node or newer is needed by the pinned npm references; found '${have_node:-none}'"
  echo "conformance: 0 passed, 1 failed"
  exit 1
fi

cd "$root"
inputs=(samples/lab samples/examples)
for to in hl7v2 fhir-json fhir-xml neutral-xml neutral-json; do
  "$pftgw" convert --quiet --to "$to" --out "$work/$to" "${inputs[@]}" 2>/dev/null
  rc=$?
  # 1 = some demo results are blocked on purpose; anything else is a failure.
  if [ "$rc" -ne 0 ] && [ "$rc" -ne 1 ] && [ "$rc" -ne 3 ]; then
    echo "conformance: pftgw convert --to $to exited $rc"; exit 1
  fi
done
"$pftgw" convert --quiet --to hl7v2 --units traditional --out "$work/hl7v2-traditional" "${inputs[@]}" 2>/dev/null
"$pftgw" convert --quiet --to neutral-json --units traditional --out "$work/neutral-json-traditional" "${inputs[@]}" 2>/dev/null
mkdir -p "$work/fhir"
# summary.json is pftgw convert's run summary, not a Bundle.
find "$work/fhir-json" -maxdepth 1 -name '*.json' ! -name summary.json -exec cp {} "$work/fhir/" \;
cp "$work"/fhir-xml/*.xml "$work/fhir/"

passed=0
failed=0
run() {
  local name=$1; shift
  echo "== $name"
  if "$@"; then passed=$((passed + 1)); else failed=$((failed + 1)); echo "!! $name failed"; fi
}
run "HL7 v2 read back by Debian python3-hl7 (SI)" /usr/bin/python3 "$here/hl7_python_check.py" "$work/hl7v2" "$work/neutral-json"
run "HL7 v2 read back by Debian python3-hl7 (traditional)" /usr/bin/python3 "$here/hl7_python_check.py" "$work/hl7v2-traditional" "$work/neutral-json-traditional"
run "HL7 v2 with --reference both (device and GLI sets) by python3-hl7 and hl7v2-dictionary" bash -c "\"$pftgw\" convert --quiet --reference both --to hl7v2 --out $work/hl7v2-both ${inputs[*]} 2>/dev/null; \"$pftgw\" convert --quiet --reference both --to neutral-json --out $work/neutral-json-both ${inputs[*]} 2>/dev/null; /usr/bin/python3 $here/hl7_python_check.py $work/hl7v2-both $work/neutral-json-both && node $here/hl7_dictionary_check.mjs $work/hl7v2-both"
run "HL7 v2.5.1 structure against hl7v2-dictionary" node "$here/hl7_dictionary_check.mjs" "$work/hl7v2" "$work/hl7v2-traditional"
run "FHIR R4 against @medplum/core and fhir" node "$here/fhir_check.mjs" "$work/fhir"
run "UCUM units against @lhncbc/ucum-lhc" node "$here/ucum_check.mjs" "$work/fhir-json" "$work/hl7v2" "$work/hl7v2-traditional"
run "neutral XML against the XSD with xmllint" bash "$here/xsd_check.sh" "$pftgw"
run "neutral JSON against the JSON Schema with ajv" node "$here/json_schema_check.mjs" "$pftgw"
# HL7 ACKs: until the daemon sends them, the reader's gtest writes the ACKs of
# tests/conformance/hl7_ack_inputs/ (OruReaderAckDump), compared with python3-hl7's create_ack.
acks="$work/acks"
mkdir -p "$acks"
PFTGW_HL7_ACK_DIR="$acks" "$(dirname "$pftgw")/tests/hl7v2_tests" --gtest_filter='OruReaderAckDump*' > /dev/null
run "HL7 ACKs against Debian python3-hl7 create_ack" /usr/bin/python3 "$here/hl7_ack_check.py" "$here/hl7_ack_inputs" "$acks"
echo "conformance: $passed passed, $failed failed"
[ "$failed" -eq 0 ]

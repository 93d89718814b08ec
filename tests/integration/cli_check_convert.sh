#!/usr/bin/env bash
# The real pftgw binary on the demo lab: each bad-input class gives its specific
# finding and exit status, conversion is deterministic and names files by
# result identifier, and `pftgw quantities` matches schemas/QUANTITIES.md.
# Usage: cli_check_convert.sh PATH/TO/pftgw SOURCE_DIR
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

# expect_rule FILE RULE STATUS: check --format json names RULE, exits STATUS.
expect_rule() {
  local file=$1 rule=$2 want=$3
  "$pftgw" check --format json "$file" > "$work/out.json"
  local rc=$?
  if [ "$rc" -ne "$want" ]; then bad "$file: exit $rc, expected $want"; return; fi
  if grep -q "\"rule\": \"$rule\"" "$work/out.json"; then ok; else bad "$file: no finding $rule"; cat "$work/out.json"; fi
}

# The bad samples (samples/README.md lists the rule each must give).
expect_rule samples/lab/bad-condition-missing.xml condition.missing 1
expect_rule samples/lab/bad-unit-not-ucum.json unit.unknown 1
expect_rule samples/lab/bad-atps-no-ambient.xml condition.ambient-missing 1
expect_rule samples/lab/bad-fev1-greater-than-fvc.json consistency.fev1-fvc 1
expect_rule samples/lab/bad-fev1-80-litres.xml plausible.range 1
expect_rule samples/lab/bad-no-patient-identifier.json complete.subject-identifier 1
expect_rule samples/lab/bad-schema-not-numeric.xml value.not-numeric 1
expect_rule samples/lab/bad-schema-not-numeric.json value.not-numeric 1
expect_rule samples/lab/bad-schema-unknown-element.xml schema.unknown-element 1
expect_rule samples/lab/bad-schema-no-offset.xml time.no-offset 1
# Nothing usable could be read: exit 3.
expect_rule samples/lab/bad-schema-malformed.xml xml.malformed 3
expect_rule samples/lab/bad-schema-malformed.json json.malformed 3
expect_rule samples/lab/bad-schema-wrong-root.xml schema.wrong-root 3
expect_rule samples/lab/bad-schema-version-2.json schema.version-unsupported 3

# A missing unit, made from a good example.
sed 's/ value="2020" unit="mL" condition="ATPS">/ value="2020" condition="ATPS">/' \
  samples/examples/example-spirometry.xml > "$work/no-unit.xml"
expect_rule "$work/no-unit.xml" unit.missing 1
# The broken XML message names line and column.
"$pftgw" check samples/lab/bad-schema-malformed.xml > "$work/out.txt"
if grep -Eq 'bad-schema-malformed.xml:[0-9]+:[0-9]+: ' "$work/out.txt"; then ok; else bad "malformed XML message has no line/column"; cat "$work/out.txt"; fi
# A file that does not exist: exit 3; a bad option: exit 2.
"$pftgw" check "$work/nothing-here.xml" > /dev/null; rc=$?
[ "$rc" -eq 3 ] && ok || bad "missing input: exit $rc, expected 3"
"$pftgw" convert --to nonsense --out "$work/x" samples/examples > /dev/null 2>&1; rc=$?
[ "$rc" -eq 2 ] && ok || bad "bad --to: exit $rc, expected 2"
"$pftgw" check --bogus samples/examples > /dev/null 2>&1; rc=$?
[ "$rc" -eq 2 ] && ok || bad "unknown option: exit $rc, expected 2"

# Good examples: check exits 0; JUnit output is well-formed with one testcase per result.
"$pftgw" check samples/examples > /dev/null; rc=$?
[ "$rc" -eq 0 ] && ok || bad "check of the examples: exit $rc, expected 0"
"$pftgw" check --format junit samples/lab > "$work/junit.xml"
if xmllint --noout "$work/junit.xml" && [ "$(grep -c '<testcase ' "$work/junit.xml")" -ge 30 ]; then ok; else bad "junit output"; fi

# Conversion: deterministic, one file per result named by its identifier.
for to in hl7v2 fhir-json fhir-xml neutral-xml neutral-json; do
  "$pftgw" convert --quiet --to "$to" --out "$work/a-$to" samples/examples; rc1=$?
  "$pftgw" convert --quiet --to "$to" --out "$work/b-$to" samples/examples; rc2=$?
  if [ "$rc1" -eq 0 ] && [ "$rc2" -eq 0 ] && diff -r "$work/a-$to" "$work/b-$to" > /dev/null; then ok; else bad "convert --to $to not deterministic or failed ($rc1/$rc2)"; fi
  n=$(find "$work/a-$to" -name '*.hl7' -o -name 'KVH-*.json' -o -name 'KVH-*.xml' | wc -l)
  [ "$n" -eq 3 ] && ok || bad "convert --to $to wrote $n files for 3 examples"
done
[ -f "$work/a-hl7v2/KVH-SPX3-004001.hl7" ] && ok || bad "HL7 output not named by the result id"

# The demo lab: blocked results are not written; unreadable ones give exit 3.
"$pftgw" convert --to hl7v2 --out "$work/lab" samples/lab > "$work/summary.txt" 2> "$work/blocked.txt"; rc=$?
[ "$rc" -eq 3 ] && ok || bad "convert of the lab: exit $rc, expected 3 (malformed samples)"
[ ! -e "$work/lab/KVH-BOX2-3430.hl7" ] && ok || bad "a blocked result (bad-fev1-greater-than-fvc.json) was written"
grep -q "blocked" "$work/blocked.txt" && ok || bad "blocked results not reported"
# The revision-2 correction gets its own file beside revision 1.
ls "$work/lab" | grep -q '\.r2\.hl7$' && ok || bad "no revision-2 file"

# Archive scale: the same outputs whatever --jobs; a second run skips what is
# written; blocked and unreadable inputs are in rejects.jsonl; summary.json counts.
"$pftgw" convert --quiet --to fhir-json --jobs 1 --out "$work/j1" samples/lab 2>/dev/null
"$pftgw" convert --quiet --to fhir-json --jobs 2 --out "$work/j2" samples/lab 2>/dev/null
diff -r "$work/j1" "$work/j2" > /dev/null && ok || bad "outputs differ between --jobs 1 and --jobs 2"
written=$(python3 -c "import json,sys; print(json.load(open(sys.argv[1]))['written'])" "$work/j1/summary.json")
rejected=$(wc -l < "$work/j1/rejects.jsonl")
blocked=$(python3 -c "import json,sys; d=json.load(open(sys.argv[1])); print(d['blocked'] + d['unreadable'])" "$work/j1/summary.json")
[ "$written" -gt 20 ] && [ "$rejected" -eq "$blocked" ] && ok || bad "summary.json written=$written, rejects $rejected lines vs $blocked blocked+unreadable"
"$pftgw" convert --quiet --to fhir-json --out "$work/j1" samples/lab 2>/dev/null
skipped=$(python3 -c "import json,sys; print(json.load(open(sys.argv[1]))['skippedAlreadyWritten'])" "$work/j1/summary.json")
[ "$skipped" -eq "$written" ] && ok || bad "resumed run skipped $skipped, expected $written"
# A file cut short (a stop mid-write, a power cut) is not "already written".
victim=$(find "$work/j1" -name '*.json' ! -name summary.json | sort | head -n 1)
cp "$victim" "$work/victim.json"
truncate -s 100 "$victim"
"$pftgw" convert --quiet --to fhir-json --out "$work/j1" samples/lab 2>/dev/null
skipped=$(python3 -c "import json,sys; print(json.load(open(sys.argv[1]))['skippedAlreadyWritten'])" "$work/j1/summary.json")
[ "$skipped" -eq $((written - 1)) ] && cmp -s "$victim" "$work/victim.json" && ok ||
  bad "after a file was cut short the resumed run skipped $skipped (expected $((written - 1))) or did not rewrite it"
"$pftgw" convert --quiet --to fhir-json --units traditional --out "$work/j1" samples/lab 2>/dev/null
skipped=$(python3 -c "import json,sys; print(json.load(open(sys.argv[1]))['skippedAlreadyWritten'])" "$work/j1/summary.json")
[ "$skipped" -eq 0 ] && ok || bad "a run with other options skipped $skipped"

# Two inputs with one result id: the later one's file stays, run after run
# (the manifest's last line for a path is the one its file must match).
mkdir -p "$work/dup"
cp samples/lab/2026-03-02-brennigan-spirometry.json "$work/dup/a.json"
python3 - samples/lab/2026-03-02-brennigan-spirometry.json "$work/dup/b.json" <<'PY'
import json, sys
d = json.load(open(sys.argv[1]))
d["tests"][0].setdefault("comments", []).append("a second export of the same session")
json.dump(d, open(sys.argv[2], "w"))
PY
"$pftgw" convert --quiet --to neutral-json --out "$work/dup-out" "$work/dup" 2>/dev/null
first=$(md5sum < "$work"/dup-out/KVH-SPX3-004712.json)
"$pftgw" convert --quiet --to neutral-json --out "$work/dup-out" "$work/dup" 2>/dev/null
"$pftgw" convert --quiet --to neutral-json --out "$work/dup-out" "$work/dup" 2>/dev/null
again=$(md5sum < "$work"/dup-out/KVH-SPX3-004712.json)
skipped=$(python3 -c "import json,sys; print(json.load(open(sys.argv[1]))['skippedAlreadyWritten'])" "$work/dup-out/summary.json")
[ "$first" = "$again" ] && [ "$skipped" -eq 2 ] && grep -q 'a second export' "$work"/dup-out/KVH-SPX3-004712.json && ok ||
  bad "same id twice: the output changed between resumed runs or was not the later input's (skipped $skipped)"

# Many rejects: the first 20 are shown with their findings, every one is in rejects.jsonl.
mkdir -p "$work/bad25"
for i in $(seq 1 25); do cp samples/lab/bad-unit-not-ucum.json "$work/bad25/b$i.json"; done
"$pftgw" convert --to fhir-json --out "$work/bad25-out" "$work/bad25" > /dev/null 2> "$work/bad25.err"
shown=$(grep -c '^blocked' "$work/bad25.err")
listed=$(wc -l < "$work/bad25-out/rejects.jsonl")
[ "$shown" -eq 20 ] && [ "$listed" -eq 25 ] && grep -q 'only the first 20 are shown' "$work/bad25.err" && ok ||
  bad "25 rejects: $shown shown (20 expected), $listed in rejects.jsonl (25 expected)"
python3 - "$work/bad25-out/rejects.jsonl" <<'PY' && ok || bad "rejects.jsonl does not carry what was seen"
import json, sys
r = json.loads(open(sys.argv[1]).readline())
f = [f for f in r["findings"] if f["rule"] == "unit.unknown"][0]
sys.exit(0 if {"name": "unit", "value": "mL/min/mmHg"} in f["values"] else 1)
PY
rm "$work"/bad25/b2[1-5].json  # exactly 20: all shown, no note of more
"$pftgw" convert --to fhir-json --out "$work/bad20-out" "$work/bad25" > /dev/null 2> "$work/bad20.err"
[ "$(grep -c '^blocked' "$work/bad20.err")" -eq 20 ] && ! grep -q 'more rejected' "$work/bad20.err" && ok ||
  bad "20 rejects: not all shown, or a note of more"

# Neutral documents on standard input ("-"): one XML document, and JSON Lines
# (each line a result, named stdin:LINE) give what the files give.
"$pftgw" convert --quiet --to hl7v2 --out "$work/stdin-xml" - < samples/lab/2026-03-02-ilvesson-spirometry.xml
"$pftgw" convert --quiet --to hl7v2 --out "$work/file-xml" samples/lab/2026-03-02-ilvesson-spirometry.xml
diff -r -x summary.json -x .pftgw-done "$work/stdin-xml" "$work/file-xml" >/dev/null && ok || bad "XML on stdin differs from the file"
python3 -c "import json,sys; [print(json.dumps(json.load(open(f)))) for f in sys.argv[1:]]" \
  samples/lab/2026-03-02-brennigan-spirometry.json samples/lab/bad-unit-not-ucum.json > "$work/two.jsonl"
"$pftgw" check --format json - < "$work/two.jsonl" > "$work/stdin.json"
python3 - "$work/stdin.json" <<'PY' && ok || bad "JSON Lines on stdin: not two results stdin:1 and stdin:2"
import json, sys
d = json.load(open(sys.argv[1]))
sources = [r["source"] for r in d["results"]]
sys.exit(0 if sources == ["stdin:1", "stdin:2"] else 1)
PY

# The quantity table's Markdown rendering is committed and current.
"$pftgw" quantities --format markdown > "$work/QUANTITIES.md"
if diff -u schemas/QUANTITIES.md "$work/QUANTITIES.md" > "$work/q.diff"; then ok; else bad "schemas/QUANTITIES.md is stale: run pftgw quantities --format markdown > schemas/QUANTITIES.md"; head -20 "$work/q.diff"; fi
"$pftgw" quantities | cmp -s - schemas/quantities.csv && ok || bad "pftgw quantities differs from schemas/quantities.csv"

echo "cli: $passed passed, $failed failed"
[ "$failed" -eq 0 ]

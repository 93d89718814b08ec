#!/usr/bin/env bash
# Validates the neutral XML samples against schemas/pftgw-result-1.0.xsd with
# `xmllint --schema` (Debian libxml2-utils: the outside reference for XML Schema
# 1.0). The bad-schema-* samples must be refused. With a pftgw binary as
# argument, its `convert --to neutral-xml` output of every sample is validated
# too. Last line: "N passed, N failed"; exit 1 on any failure.
set -u
root="$(cd "$(dirname "$0")/../.." && pwd)"
xsd="$root/schemas/pftgw-result-1.0.xsd"
binary="${1:-}"
passed=0
failed=0

check() {  # check LABEL FILE EXPECT(valid|invalid)
    local out
    if out=$(xmllint --noout --schema "$xsd" "$2" 2>&1); then
        if [ "$3" = valid ]; then passed=$((passed + 1)); echo "ok   $1"
        else failed=$((failed + 1)); echo "FAIL $1: accepted, but it must be refused"; fi
    else
        if [ "$3" = invalid ]; then passed=$((passed + 1)); echo "ok   $1 (refused: $(echo "$out" | head -1 | cut -c1-120))"
        else failed=$((failed + 1)); echo "FAIL $1:"; echo "$out" | head -5; fi
    fi
}

inputs=()
for dir in samples/lab samples/examples; do
    for f in "$root/$dir"/*; do
        name=$(basename "$f")
        case "$name" in
            bad-schema-*.xml) check "$dir/$name" "$f" invalid ;;
            bad-schema-*) ;;
            *.xml) check "$dir/$name" "$f" valid; inputs+=("$f") ;;
            *.json | *.jsonl) inputs+=("$f") ;;
        esac
    done
done

if [ -n "$binary" ]; then
    out=$(mktemp -d)
    "$binary" convert --to neutral-xml --out "$out" "${inputs[@]}" >/dev/null 2>&1
    status=$?
    # Status 1: some results blocked by findings (the bad-* samples); the rest are written.
    if [ "$status" -eq 0 ] || [ "$status" -eq 1 ]; then
        mapfile -t written < <(find "$out" -name '*.xml' | sort)
        if [ "${#written[@]}" -eq 0 ]; then failed=$((failed + 1)); echo "FAIL convert wrote no .xml file"; fi
        for f in "${written[@]}"; do check "written ${f#"$out"/}" "$f" valid; done
    else
        echo "note: $binary convert failed (status $status); written forms not checked"
    fi
    rm -rf "$out"
fi

echo "$passed passed, $failed failed"
[ "$failed" -eq 0 ]

#!/usr/bin/python3
"""Outside-reference check of pftgw's HL7 v2.5.1 ORU^R01 output.

Reference: Debian's python3-hl7 0.4.5 (run with /usr/bin/python3; another
python on PATH may not see it). It parses and unescapes; it does not validate
structure (hl7_dictionary_check.mjs does that against hl7v2-dictionary 1.8.0).

Usage: hl7_python_check.py HL7_DIR NEUTRAL_JSON_DIR [--quantities CSV]

For every HL7_DIR/<name>.hl7 the neutral JSON NEUTRAL_JSON_DIR/<name>.json of
the same result holds the rendered values (tests[].values[] with kind, value or
absent, unit), tests[].comments[] and findings[]. Checks per message:
  - hl7.parse succeeds on the UTF-8 text (MSH-18 says UNICODE UTF-8);
  - MSH-9 is ORU^R01^ORU_R01, MSH-12 is 2.5.1, MSH-10 has 1..20 characters
    (2.5.1 length) and no two files share one;
  - per OBR group, the measured OBX (OBX-4 empty) are the test's values in
    order: OBX-3 code as schemas/quantities.csv gives it (LN or 99PFTGW),
    OBX-2 NM and OBX-5 equal to the neutral value rounded to the OBX's own
    decimals, OBX-6 unit (unescaped) equal to the neutral unit; an absent
    value has an empty OBX-5 and OBX-11 X;
  - every test comment decodes (hl7's unescape) to an NTE of its OBR group,
    exactly; a value's comments (tests[].values[].comments[]) decode, in
    order, to the first NTEs right after that value's OBX (HL7 v2.5.1 ch. 7,
    from memory: an NTE after an OBX is a comment on that observation); every warning or error finding's message is inside a decoded NTE,
    and so is every quality.* / adjust.* finding (grades, acceptability,
    repeatability) but the "not assessed" / "not graded" notes, which stay in `check`;
  - each quality.grade finding at tests[i] with values ("FEV1", "A") ... has
    in OBR group i an ST OBX coded FEV1.grade^...^99PFTGW whose OBX-5 is the
    grade, and no group has a grade OBX without such a finding (project codes,
    schemas/README.md "Codes that are not quantities").
Last line: "N passed, N failed"; exit status 1 on any failure or no input.
"""

import csv
import json
import os
import sys

import hl7  # Debian python3-hl7

from tally import Tally


def field(seg, n):
    """Field n (HL7 numbering; python-hl7 keeps MSH-1 as seg[1]) as raw text."""
    try:
        return str(seg[n])
    except IndexError:
        return ""


def component(seg, n, c):
    raw = field(seg, n)
    parts = raw.split("^")
    return parts[c - 1] if 1 <= c <= len(parts) else ""


def fixed(value, decimals):
    text = f"{value:.{decimals}f}"
    if text.startswith("-") and set(text[1:]) <= {"0", "."}:
        text = text[1:]  # the writer sends no signed zero
    return text


def load_codes(path):
    codes = {}
    with open(path, newline="", encoding="utf-8") as f:
        for row in csv.DictReader(f):
            system = "LN" if row["code_system"] == "LN" else "99PFTGW"
            codes[row["key"]] = (row["code"], system)
    return codes


def check_message(name, text, neutral, codes, seen_ids):
    errors = []
    try:
        msg = hl7.parse(text)
    except Exception as e:  # the reference's own error is the finding
        return [f"hl7.parse failed: {e}"]

    msh = msg.segment("MSH")
    if field(msh, 9) != "ORU^R01^ORU_R01":
        errors.append(f"MSH-9 is {field(msh, 9)!r}")
    if field(msh, 12) != "2.5.1":
        errors.append(f"MSH-12 is {field(msh, 12)!r}")
    control_id = field(msh, 10)
    if not 1 <= len(control_id) <= 20:
        errors.append(f"MSH-10 {control_id!r} is not 1..20 characters")
    if control_id in seen_ids:
        errors.append(f"MSH-10 {control_id} also in {seen_ids[control_id]}")
    seen_ids.setdefault(control_id, name)

    # OBR groups: measured OBX and decoded NTE texts per group.
    groups = []
    after_obx = None  # the decoded NTE texts right after the last measured OBX
    for seg in msg:
        sid = field(seg, 0)
        if sid != "NTE":
            after_obx = None
        if sid == "OBR":
            groups.append({"obx": [], "obx_notes": [], "notes": [], "grades": {}})
        elif not groups:
            continue
        elif sid == "OBX" and field(seg, 2) == "ST" and component(seg, 3, 1).endswith(".grade"):
            name = component(seg, 3, 1)[: -len(".grade")]
            if component(seg, 3, 3) != "99PFTGW":
                errors.append(f"grade OBX {name}: OBX-3.3 {component(seg, 3, 3)!r}")
            groups[-1]["grades"][name] = msg.unescape(field(seg, 5))
        elif sid == "OBX" and field(seg, 4) == "":
            groups[-1]["obx"].append(seg)
            groups[-1]["obx_notes"].append([])
            after_obx = groups[-1]["obx_notes"][-1]
        elif sid == "NTE":
            # Text is one value: python-hl7 gives a Field of plain strings;
            # nested repetitions/components mean an unescaped ^ ~ & in the text.
            try:
                nte3 = seg[3]
            except IndexError:
                nte3 = []
            if any(not isinstance(part, str) for part in nte3):
                errors.append(f"NTE {field(seg, 1)}: NTE-3 has unescaped delimiters: {field(seg, 3)!r}")
                continue
            groups[-1]["notes"].append(msg.unescape(field(seg, 3)))
            if after_obx is not None:
                after_obx.append(groups[-1]["notes"][-1])

    tests = neutral.get("tests", [])
    if len(groups) != len(tests):
        errors.append(f"{len(groups)} OBR groups for {len(tests)} tests")
        return errors

    for t, (group, test) in enumerate(zip(groups, tests)):
        values = test.get("values", [])
        if len(group["obx"]) != len(values):
            errors.append(f"test {t}: {len(group['obx'])} measured OBX for {len(values)} values")
            continue
        for obx, obx_notes, value in zip(group["obx"], group["obx_notes"], values):
            kind = value["kind"]
            where = f"test {t} {kind}"
            comments = value.get("comments", [])
            if obx_notes[: len(comments)] != comments:
                errors.append(f"{where}: comments {comments!r} but the NTEs right after "
                              f"its OBX decode to {obx_notes!r}")
            want = codes.get(kind)
            got = (component(obx, 3, 1), component(obx, 3, 3))
            if want is None or got != want:
                errors.append(f"{where}: OBX-3 {got} but quantities.csv says {want}")
            if "value" not in value:
                if field(obx, 5) != "" or field(obx, 11) != "X":
                    errors.append(f"{where}: absent but OBX-5 {field(obx, 5)!r} "
                                  f"OBX-11 {field(obx, 11)!r}")
                continue
            if field(obx, 2) != "NM":
                errors.append(f"{where}: OBX-2 {field(obx, 2)!r}")
            shown = field(obx, 5)
            decimals = len(shown.split(".", 1)[1]) if "." in shown else 0
            if shown != fixed(float(value["value"]), decimals):
                errors.append(f"{where}: OBX-5 {shown} but the neutral value "
                              f"{value['value']} rounds to {fixed(value['value'], decimals)}")
            unit = msg.unescape(component(obx, 6, 1))
            if unit != value.get("unit", ""):
                errors.append(f"{where}: OBX-6 {unit!r} but neutral unit {value.get('unit')!r}")
            if component(obx, 6, 3) != "UCUM":
                errors.append(f"{where}: OBX-6.3 {component(obx, 6, 3)!r}")
        for comment in test.get("comments", test.get("comment", [])):
            if comment not in group["notes"]:
                errors.append(f"test {t}: comment {comment!r} not decoded from any NTE")

    want_grades = [{} for _ in groups]
    for finding in neutral.get("findings", []):
        if finding.get("rule") != "quality.grade":
            continue
        path = finding.get("path", "")
        if not (path.startswith("tests[") and path.endswith("]") and path[6:-1].isdigit()):
            continue
        t = int(path[6:-1])
        if t < len(want_grades):
            for v in finding.get("values", []):
                if v.get("name") in ("FEV1", "FVC", "DLCO"):
                    want_grades[t][v["name"]] = v.get("value", "")
    for t, (group, want) in enumerate(zip(groups, want_grades)):
        if group["grades"] != want:
            errors.append(f"test {t}: grade OBX {group['grades']} but findings say {want}")

    all_notes = [n for g in groups for n in g["notes"]]
    for finding in neutral.get("findings", []):
        rule = finding.get("rule", "")
        # The project's rule (core info_travels_to_record): quality.* and adjust.*
        # info travels, except notes that something could not be assessed.
        travels = finding.get("severity") in ("warning", "error") or (
            rule.startswith(("quality.", "adjust.")) and not rule.endswith((".not-assessed", ".not-graded")))
        if not travels:
            continue
        if not any(finding["message"] in n for n in all_notes):
            errors.append(f"finding {finding.get('rule')}: message not decoded from any NTE")
    return errors


def main(argv):
    args = [a for a in argv[1:] if not a.startswith("--")]
    here = os.path.dirname(os.path.abspath(__file__))
    quantities = os.path.join(here, "..", "..", "schemas", "quantities.csv")
    if "--quantities" in argv:
        quantities = argv[argv.index("--quantities") + 1]
        args.remove(quantities)
    if len(args) != 2:
        print(__doc__.strip().splitlines()[4], file=sys.stderr)
        print("0 passed, 1 failed")
        return 2
    hl7_dir, json_dir = args
    codes = load_codes(quantities)
    # Recursively: the CLI puts large batches into subfolders; the JSON of a
    # result sits at the same relative path in NEUTRAL_JSON_DIR.
    names = sorted(
        os.path.relpath(os.path.join(root, f), hl7_dir)[:-4]
        for root, _, files in os.walk(hl7_dir)
        for f in files
        if f.endswith(".hl7")
    )
    tally = Tally()
    seen_ids = {}
    for name in names:
        try:
            with open(os.path.join(hl7_dir, name + ".hl7"), "rb") as f:
                text = f.read().decode("utf-8")
            with open(os.path.join(json_dir, name + ".json"), encoding="utf-8") as f:
                neutral = json.load(f)
            errors = check_message(name, text, neutral, codes, seen_ids)
        except (OSError, UnicodeDecodeError, ValueError) as e:
            errors = [str(e)]
        tally.record(name, errors)
    return tally.finish(None if names else f"no .hl7 files in {hl7_dir}")

if __name__ == "__main__":
    sys.exit(main(sys.argv))

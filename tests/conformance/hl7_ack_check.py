#!/usr/bin/python3
"""Outside-reference check of pftgw's HL7 v2 ACKs for received ORU^R01.

Reference: Debian's python3-hl7 0.4.5 (run with /usr/bin/python3), its
Message.create_ack. For every message of every INPUT_DIR/<name>.hl7, the
project's ACK is ACK_DIR/<name>.<n>.ack (n counts the messages of the file
from 1; written by the hl7v2_tests gtest OruReaderAckDump with
PFTGW_HL7_ACK_DIR=ACK_DIR). Per message, python3-hl7 parses the received
message and makes its own ACK with create_ack(ack_code=<expected code>); the
fields that must match are compared with the project's ACK as python3-hl7
parses it:
  - MSA-1 (the expected code of EXPECTED below, written with the inputs)
    and MSA-2 (= the received MSH-10);
  - MSH-1, MSH-2, MSH-3..6 (swapped from the received MSH-5/6/3/4),
    MSH-9 components 1 and 2 (ACK and the received trigger), MSH-11, MSH-12;
  - MSH-9.3: create_ack always writes ACK; the project writes none for a 2.3
    message (its own choice), so it is compared for 2.3.1 and later only;
  - the project's MSH-10 has 1..20 characters (2.5.1) and is not the received one.
python3-hl7 splits segments on CR only and does not split files into
messages: this script splits at each MSH (skipping FHS/BHS/BTS/FTS) and joins
segments with CR, after decoding the bytes as MSH-18 says (8859/1 -> latin-1,
else UTF-8).
Usage: hl7_ack_check.py INPUT_DIR ACK_DIR
Last line: "N passed, N failed"; exit status 1 on any failure or no input.
"""

import os
import re
import sys

import hl7  # Debian python3-hl7

from tally import Tally

# What each invented input was written to provoke (same table as the gtest).
EXPECTED = {
    "accept_23_lf.1": "AA",
    "accept_251.1": "AA",
    "batch_two.1": "AA",
    "batch_two.2": "AE",
    "error_text_in_nm.1": "AE",
    "odd_delimiters.1": "AA",
    "reject_adt.1": "AR",
}


def messages_of(raw):
    """The messages of a file as lists of byte segments."""
    out = []
    for seg in re.split(rb"\r\n|\r|\n", raw):
        seg = seg.strip(b"\x0b\x1c")
        if not seg:
            continue
        sid = seg[:3]
        if sid == b"MSH":
            out.append([seg])
        elif sid in (b"FHS", b"BHS", b"BTS", b"FTS"):
            continue
        elif out:
            out[-1].append(seg)
    return out


def encoding_of(msh_bytes):
    sep = msh_bytes[3:4]
    fields = msh_bytes.split(sep)
    msh18 = fields[17] if len(fields) > 17 else b""  # fields[0] is "MSH", MSH-n is fields[n-1]
    return "latin-1" if msh18 == b"8859/1" else "utf-8"


def f(seg, n):
    return str(seg(n))


def c(seg, n, k):
    try:
        return str(seg(n)(1)(k))
    except (IndexError, KeyError):
        return ""


def check(name, received_text, ack_text, expected):
    errors = []
    received = hl7.parse(received_text)
    reference = received.create_ack(ack_code=expected, message_id="X")
    try:
        ours = hl7.parse(ack_text)
    except Exception as e:  # the reference's own parse error is the finding
        return [f"python3-hl7 cannot parse the project's ACK: {e}"]
    rm, om = reference.segment("MSH"), ours.segment("MSH")
    ra, oa = reference.segment("MSA"), ours.segment("MSA")
    for n in (1, 2, 3, 4, 5, 6, 11, 12):
        if f(rm, n) != f(om, n):
            errors.append(f"MSH-{n}: python3-hl7 {f(rm, n)!r}, project {f(om, n)!r}")
    for k in (1, 2):
        if c(rm, 9, k) != c(om, 9, k):
            errors.append(f"MSH-9.{k}: python3-hl7 {c(rm, 9, k)!r}, project {c(om, 9, k)!r}")
    version = f(received.segment("MSH"), 12)
    if version != "2.3" and c(rm, 9, 3) != c(om, 9, 3):
        errors.append(f"MSH-9.3: python3-hl7 {c(rm, 9, 3)!r}, project {c(om, 9, 3)!r}")
    for n in (1, 2):
        if f(ra, n) != f(oa, n):
            errors.append(f"MSA-{n}: python3-hl7 {f(ra, n)!r}, project {f(oa, n)!r}")
    control = f(om, 10)
    if not 1 <= len(control) <= 20:
        errors.append(f"MSH-10 {control!r} is not 1..20 characters")
    if control == f(received.segment("MSH"), 10):
        errors.append("MSH-10 repeats the received control id")
    return errors


def main(argv):
    if len(argv) != 3:
        print("usage: hl7_ack_check.py INPUT_DIR ACK_DIR", file=sys.stderr)
        print("0 passed, 1 failed")
        return 2
    input_dir, ack_dir = argv[1], argv[2]
    tally = Tally()
    names = sorted(n for n in os.listdir(input_dir) if n.endswith(".hl7"))
    for file_name in names:
        with open(os.path.join(input_dir, file_name), "rb") as fh:
            raw = fh.read()
        for i, segments in enumerate(messages_of(raw), start=1):
            name = f"{file_name[:-4]}.{i}"
            encoding = encoding_of(segments[0])
            try:
                received_text = "\r".join(s.decode(encoding) for s in segments)
                with open(os.path.join(ack_dir, name + ".ack"), "rb") as fh:
                    ack_text = fh.read().decode(encoding)
                if name not in EXPECTED:
                    errors = [f"no expected ACK code for {name} in EXPECTED"]
                else:
                    errors = check(name, received_text, ack_text, EXPECTED[name])
            except (OSError, UnicodeDecodeError, ValueError) as e:
                errors = [str(e)]
            tally.record(name, errors)
    return tally.finish(None if names else f"no .hl7 files in {input_dir}")

if __name__ == "__main__":
    sys.exit(main(sys.argv))

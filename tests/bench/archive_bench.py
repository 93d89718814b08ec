#!/usr/bin/env python3
"""Archive-scale benchmarks of `pftgw convert` (issue 3), printing figures.

1. HL7 v2 ORU (about 2.5 KB, 25 OBX each, invented) -> FHIR JSON through
   `pftgw convert --from hl7v2`, N messages, with 1 and 2 jobs: messages per
   second and peak RSS. These runs use --dry-run (DECISIONS.md: measure the
   program, not the disk); one more run writes every file to disk and says so,
   and one reads all the messages from a single batch file (peak RSS).
2. A CSV archive (one row per session) -> neutral JSON at two sizes: peak RSS,
   to show that memory does not grow with the archive.

Usage: archive_bench.py PATH/TO/pftgw [--messages N] [--csv-rows N ...] [--repeat N] [--work DIR]
Targets (issue 3): >= 10,000 messages/s with 1 job, >= 1.7x that with 2 jobs,
peak memory <= 200 MB; the CSV archive under 200 MB at 1,000,000 sessions.
"""
import argparse, os, random, resource, shutil, subprocess, sys, tempfile, time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))

OBX = [  # code, value range, unit
    ("B01", (1.5, 4.5), "L"), ("B02", (2.0, 5.5), "L"), ("B03", (60, 85), "%"), ("B04", (4, 10), "L/s"),
    ("B05", (1, 4), "L/s"), ("B06", (6, 12), "s"), ("B07", (2.5, 4), "L"), ("B08", (1.9, 3.2), "L"),
    ("B09", (3, 5), "L"), ("B10", (2.4, 4), "L"), ("B11", (2.2, 5.5), "L"), ("B12", (4.5, 7.5), "L"),
    ("B13", (1.3, 2.4), "L"), ("B14", (2.4, 3.6), "L"), ("B15", (0.8, 1.4), "L"), ("B16", (2.0, 3.8), "L"),
    ("B17", (25, 35), "%"), ("B18", (18, 32), "mL/min/mm[Hg]"), ("B19", (4.5, 6.5), "L"),
    ("B20", (4, 5.5), "mL/min/mm[Hg]/L"), ("B21", (3, 5), "L"), ("B22", (9, 11), "s"),
    ("B23", (12, 16), "g/dL"), ("B24", (0.5, 2), "%"), ("B25", (24, 32), "mL/min/mm[Hg]"),
]


def hl7_message(i, rnd):
    seg = [f"MSH|^~\\&|BOX25|BENCH1|||20260301{8 + i % 10:02d}0000||ORU^R01|B{i:09d}|P|2.5.1||||||UNICODE UTF-8",
           f"PID|1||H{i % 50000:07d}^^^&https://bench.example/mrn&URI^MR||Benchperson^Case{i % 997}||19{50 + i % 40}0612|{'MF'[i % 2]}",
           f"OBR|1|P{i}|F{i}|PFT|||20260301{8 + i % 10:02d}0500+0100"]
    fev1 = 1.5 + 3.0 * rnd.random()
    for n, (code, (lo, hi), unit) in enumerate(OBX, 1):
        v = lo + (hi - lo) * rnd.random()
        if code == "B01":
            v = fev1
        elif code == "B02":
            v = fev1 * (1.15 + 0.3 * rnd.random())  # FVC above FEV1, as in any real maneuver
        seg.append(f"OBX|{n}|NM|{code}^Bench quantity {code}^L||{v:.2f}|{unit}^^UCUM|||||F|||"
                   f"20260301{8 + i % 10:02d}0500+0100||||BENCH1")
    return "\r".join(seg) + "\r"


def csv_rows(path, n):
    with open(path, "w") as f:
        f.write("PatientNo;LastName;FirstName;Born;Sex;Order;Session;Started;TRoom;PBaro;RH;"
                "FEV1_ml;FEV1_LLN_ml;FEV1_ULN_ml;FVC_ml;PEF_lmin\n")
        for i in range(n):
            f.write(f"KV{i % 90000:06d};Archive;Person{i % 313};19{50 + i % 40}0411;{'MF'[i % 2]};O{i};"
                    f"{i:08d};2019{1 + i % 12:02d}{1 + i % 28:02d}091000;22.5;755;38;"
                    f"{2000 + i % 1500};1730;2810;{2700 + i % 1500};{300 + i % 200}\n")


def run(cmd):
    """Runs one command; returns (seconds, peak RSS of that very process in MiB)."""
    t0 = time.monotonic()
    p = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    _, status, usage = os.wait4(p.pid, 0)  # this child's own rusage, not the largest so far
    secs = time.monotonic() - t0
    rc = os.waitstatus_to_exitcode(status)
    if rc not in (0, 1):  # 1: some results blocked by their findings (still converted work)
        sys.exit(f"{' '.join(cmd)} exited {rc}:\n{p.stderr.read()[-2000:]}")
    return secs, usage.ru_maxrss / 1024.0


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("pftgw")
    ap.add_argument("--messages", type=int, default=100_000)
    ap.add_argument("--csv-rows", type=int, nargs="+", default=[100_000, 1_000_000])
    ap.add_argument("--repeat", type=int, default=3, help="runs of each HL7 timing; the best is kept")
    ap.add_argument("--work", default="/dev/shm" if os.path.isdir("/dev/shm") else tempfile.gettempdir())
    a = ap.parse_args()
    pftgw = os.path.abspath(a.pftgw)
    work = tempfile.mkdtemp(prefix="pftgw-bench-", dir=a.work)
    try:
        rnd = random.Random(20261202)
        hl7_dir = os.path.join(work, "hl7")
        os.makedirs(hl7_dir)
        sizes = 0
        for i in range(a.messages):
            m = hl7_message(i, rnd)
            sizes += len(m)
            with open(os.path.join(hl7_dir, f"m{i:07d}.hl7"), "w") as f:
                f.write(m)
        print(f"HL7 ORU -> FHIR JSON: {a.messages} messages, {sizes / a.messages:.0f} bytes, 25 OBX each "
              f"(inputs in {a.work})")
        profile = os.path.join(HERE, "bench-box.toml")
        base = [pftgw, "convert", "--quiet", "--from", "hl7v2", "--profile", profile, "--to", "fhir-json"]
        rates = {}
        for jobs in (1, 2):
            # Best of --repeat runs: a shared machine only ever slows a run down.
            runs = [run(base + ["--dry-run", "--jobs", str(jobs), hl7_dir]) for _ in range(a.repeat)]
            secs = min(t for t, _ in runs)
            rss = max(m for _, m in runs)
            rates[jobs] = a.messages / secs
            print(f"  --jobs {jobs} (no files written): {rates[jobs]:9.0f} messages/s  {secs:6.2f} s  "
                  f"peak RSS {rss:6.1f} MiB  (best of {a.repeat}: "
                  + ", ".join(f"{t:.2f}" for t, _ in runs) + " s)")
        print(f"  speed-up with 2 jobs: {rates[2] / rates[1]:.2f}x")
        out = os.path.join(tempfile.gettempdir(), "pftgw-bench-out")
        shutil.rmtree(out, ignore_errors=True)
        secs, rss = run(base + ["--jobs", "2", "--out", out, hl7_dir])
        print(f"  --jobs 2, writing every file to disk ({out}): {a.messages / secs:9.0f} messages/s  "
              f"peak RSS {rss:6.1f} MiB")
        shutil.rmtree(out, ignore_errors=True)
        # The same messages as one batch file (FHS/BHS ... BTS/FTS): read in
        # pieces, so memory does not grow with the file.
        batch = os.path.join(work, "batch.hl7")
        with open(batch, "w") as f:
            f.write("FHS|^~\\&|BOX25|BENCH1\rBHS|^~\\&|BOX25|BENCH1\r")
            for name in sorted(os.listdir(hl7_dir)):
                with open(os.path.join(hl7_dir, name)) as m:
                    f.write(m.read())
            f.write(f"BTS|{a.messages}\rFTS|1\r")
        shutil.rmtree(hl7_dir, ignore_errors=True)
        secs, rss = run(base + ["--dry-run", "--jobs", "2", batch])
        print(f"  one batch file of them ({os.path.getsize(batch) / 1e6:.0f} MB), --jobs 2: "
              f"{a.messages / secs:9.0f} messages/s  peak RSS {rss:6.1f} MiB")
        os.remove(batch)

        csv_profile = os.path.join(ROOT, "samples", "profiles", "aldercrest-flowquill-3.toml")
        for n in sorted(a.csv_rows):
            path = os.path.join(work, f"archive-{n}.csv")
            csv_rows(path, n)
            secs, rss = run([pftgw, "convert", "--quiet", "--dry-run", "--from", "csv", "--profile", csv_profile,
                             "--to", "neutral-json", path])
            print(f"CSV archive -> neutral JSON, {n:>9} sessions ({os.path.getsize(path) / 1e6:6.1f} MB): "
                  f"{n / secs:9.0f} sessions/s  peak RSS {rss:6.1f} MiB")
            os.remove(path)
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()

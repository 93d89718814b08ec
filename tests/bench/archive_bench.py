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

UNITS = {  # bench-box.toml's codes and the units the box sends
    "B01": "L", "B02": "L", "B03": "%", "B04": "L/s", "B05": "L/s", "B06": "s", "B07": "L",
    "B08": "L", "B09": "L", "B10": "L", "B11": "L", "B12": "L", "B13": "L", "B14": "L",
    "B15": "L", "B16": "L", "B17": "%", "B18": "mL/min/mm[Hg]", "B19": "L",
    "B20": "mL/min/mm[Hg]/L", "B21": "L", "B22": "s", "B23": "g/dL", "B24": "%",
    "B25": "mL/min/mm[Hg]",
}


def session_values(rnd):
    """An invented session whose values agree with each other as a real one's
    do (the lung-volume identities, the ratios, VA within TLC, VI near VC), so
    the benchmark converts results rather than rejecting them. Each value is
    rounded as sent, and what is computed from others uses the rounded ones."""
    u = rnd.uniform
    r2 = lambda x: round(x, 2)
    v = {}
    v["B01"] = fev1 = r2(u(1.5, 4.5))
    v["B02"] = fvc = r2(fev1 * u(1.15, 1.45))
    v["B03"] = round(100 * fev1 / fvc, 1)
    v["B04"], v["B05"], v["B06"] = r2(u(4, 10)), r2(u(1, 4)), r2(u(6, 12))
    v["B07"] = r2(fev1 * u(0.9, 1.2))
    v["B08"] = r2(v["B07"] * 0.8)
    v["B09"] = r2(fvc * u(0.9, 1.2))
    v["B10"] = r2(v["B09"] * 0.8)
    v["B11"] = vc = r2(fvc * u(0.98, 1.04))
    v["B15"] = erv = r2(u(0.8, 1.4))
    v["B16"] = r2(vc - erv)                         # IC = VC - ERV
    v["B13"] = rv = r2(u(1.3, 2.4))
    v["B14"] = r2(rv + erv)                         # FRC = RV + ERV
    v["B12"] = tlc = r2(rv + vc)                    # TLC = RV + VC
    v["B17"] = round(100 * rv / tlc, 1)
    v["B19"] = va = r2(tlc * u(0.85, 0.95))
    v["B18"] = dlco = r2(va * u(3.8, 5.6))          # KCO 3.8-5.6 mL/min/mm[Hg]/L
    v["B20"] = r2(dlco / va)
    v["B21"] = r2(vc * u(0.92, 1.0))
    v["B22"], v["B23"], v["B24"] = r2(u(9.5, 10.5)), r2(u(12, 16)), r2(u(0.5, 2))
    v["B25"] = r2(dlco * u(0.9, 1.2))
    return v


def hl7_message(i, rnd):
    seg = [f"MSH|^~\\&|BOX25|BENCH1|||20260301{8 + i % 10:02d}0000||ORU^R01|B{i:09d}|P|2.5.1||||||UNICODE UTF-8",
           f"PID|1||H{i % 50000:07d}^^^&https://bench.example/mrn&URI^MR||Benchperson^Case{i % 997}||19{50 + i % 40}0612|{'MF'[i % 2]}",
           f"OBR|1|P{i}|F{i}|PFT|||20260301{8 + i % 10:02d}0500+0100"]
    for n, (code, value) in enumerate(session_values(rnd).items(), 1):
        seg.append(f"OBX|{n}|NM|{code}^Bench quantity {code}^L||{value:.2f}|{UNITS[code]}^^UCUM|||||F|||"
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

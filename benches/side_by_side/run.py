"""Side by side: assort against the script an analyst would write, on the
same seeded files, in one run. Whole-process wall time and peak memory
(resident set, from the kernel's accounting of each child), medians of
--repeats runs taken alternately, and the ratio reference / assort.

    python3 benches/side_by_side/run.py                 # every case, 3 runs each
    python3 benches/side_by_side/run.py --cases sweep100k,trees15k --repeats 5

It builds assort (release), writes the data with the seeded generator
(examples/bench_data.rs) into target/bench-data, and installs the pinned
reference (requirements.txt beside this file) into a throwaway virtual
environment, target/bench-venv. Results go to standard output as a
Markdown table, ready for docs/performance.md.
"""
import argparse
import json
import os
import platform
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
HERE = Path(__file__).resolve().parent
DATA = ROOT / "target" / "bench-data"
VENV = ROOT / "target" / "bench-venv"
ASSORT = ROOT / "target" / "release" / "assort"
GENERATE = ROOT / "target" / "release" / "examples" / "bench_data"

# name: (records, features, recipe body after `features all`, reference args or None, what)
# A case named *_parquet reads the same data from a Parquet file that pyarrow
# writes from the CSV (snappy, row groups of 128 Ki records), to set its time
# beside the case of the same name read from CSV.
# Cases whose recipe names `categories` read a file with four category
# columns besides the numbers (bench_data's CATEGORIES argument).
# Cases without a reference are measured on their own; sweep1m against
# sweep1m_sampled also prints the within-SS each reaches at every k.
CASES = {
    "sweep100k": (100_000, 8, "scale none\nkmeans k 2..10 restarts 10\nchoose k by silhouette\n",
                  ["sweep", 2, 10, 10], "sweep k = 2..10, 10 restarts, silhouette, C-H, D-B"),
    "kmeans1m": (1_000_000, 16, "scale none\nkmeans k 8 restarts 1\n",
                 ["kmeans", 8], "k-means k = 8, 1 restart, then silhouette, C-H, D-B"),
    "exact20k": (20_000, 10, "scale none\nkmeans k 8 restarts 1\nevidence silhouette exact\n",
                 ["exact", 8], "k-means k = 8, 1 restart, exact silhouette"),
    "ward15k": (15_000, 10, "scale none\ntree linkage ward k 8\n", ["tree", "ward", 8], "Ward tree, cut at 8"),
    "average15k": (15_000, 10, "scale none\ntree linkage average k 8\n", ["tree", "average", 8], "average-linkage tree, cut at 8"),
    "single15k": (15_000, 10, "scale none\ntree linkage single k 8\n", ["tree", "single", 8], "single-linkage tree, cut at 8"),
    "sweep1m": (1_000_000, 16, "scale none\nkmeans k 2..10 restarts 10\nchoose k by silhouette\n", None,
                "sweep k = 2..10, 10 restarts, every restart on every record (full batch)"),
    "sweep1m_sampled": (1_000_000, 16, "scale none\nkmeans k 2..10 restarts 10 sample 200000\nchoose k by silhouette\n", None,
                        "sweep k = 2..10, 10 restarts on a sample of 200,000, best 3 refined on every record"),
    "sweep1m_by_key": (1_000_000, 16, "scale none\nkmeans k 2..10 restarts 10 sample 200000 by key\nchoose k by silhouette\n", None,
                       "sweep1m_sampled with `by key`: records in key order, the sample by key rank, exact refinement"),
    "sweep10m": (10_000_000, 16, "scale none\nkmeans k 2..10 restarts 10 sample 200000\nchoose k by silhouette\n", None,
                 "sweep k = 2..10, 10 restarts on a sample of 200,000, best 3 refined on every record"),
    "kmeans1m_parquet": (1_000_000, 16, "scale none\nkmeans k 8 restarts 1\n", None,
                         "kmeans1m with the same data read from Parquet (written by pyarrow, snappy)"),
    "kprototypes1m": (1_000_000, 12, "categories c1, c2, c3, c4\nkprototypes k 8 restarts 3\n", None,
                      "k-prototypes k = 8, 3 restarts, 12 numbers + 4 categories (no general-purpose reference)"),
    "kmedoids20k": (20_000, 12, "categories c1, c2, c3, c4\nkmedoids k 8 restarts 3\n", None,
                    "k-medoids on Gower, k = 8, 3 restarts, 12 numbers + 4 categories (no general-purpose reference)"),
    "ward100k": (100_000, 10, "scale none\ntree linkage ward k 8\n", None, "Ward tree, cut at 8 (reference cannot hold the matrix)"),
    "single100k": (100_000, 10, "scale none\ntree linkage single k 8\n", None, "single-linkage tree, cut at 8 (reference cannot hold the matrix)"),
    # The shipped demo recipe as it stands (k = 2..8, 50 restarts each, a
    # category, tallies, names, rules, scoring SQL, hand-off, report) over
    # its 6,000 rows repeated to 1,000,000 members with text keys.
    "demo1m": (1_000_000, 8, None, None,
               "the demo recipe over its rows repeated to 1,000,000 members: text keys, a category, tallies, every output"),
}

DEMO = ROOT / "recipes"


def prepare_demo(name, n):
    """The demo's data (and its planted segments) repeated to `n` members,
    each key suffixed by its repetition, and the demo recipe pointed at
    them, writing its outputs under out-<name>/."""
    rows = (DEMO / "data" / "coop_members.csv").read_text().splitlines()
    planted = (DEMO / "data" / "coop_members_planted.csv").read_text().splitlines()
    for src, dst in ((rows, f"{name}.csv"), (planted, f"{name}_planted.csv")):
        path = DATA / dst
        if path.exists():
            continue
        body = src[1:]
        with open(path, "w") as out:
            out.write(src[0] + "\n")
            for i in range(n):
                key, rest = body[i % len(body)].split(",", 1)
                out.write(f"{key}-{i // len(body)},{rest}\n")
    recipe = (DEMO / "coop-members.assort").read_text()
    recipe = recipe.replace('"data/coop_members.csv"', f'"{name}.csv"')
    recipe = recipe.replace('"data/coop_members_planted.csv"', f'"{name}_planted.csv"')
    recipe = recipe.replace('"out/', f'"out-{name}/')
    (DATA / f"{name}.assort").write_text(recipe)


def sh(cmd, **kw):
    subprocess.run(cmd, check=True, **kw)


def prepare(cases):
    sh(["cargo", "build", "--release", "--quiet", "--bin", "assort", "--example", "bench_data"], cwd=ROOT)
    DATA.mkdir(parents=True, exist_ok=True)
    for name in cases:
        n, d = CASES[name][0], CASES[name][1]
        if name.startswith("demo"):
            prepare_demo(name, n)
            continue
        cats = 4 if "categories" in CASES[name][2] else 0
        csv = DATA / (f"d{n}_{d}.csv" if cats == 0 else f"d{n}_{d}_c{cats}.csv")
        if not csv.exists():
            sh([str(GENERATE), str(csv), str(n), str(d), "7", str(cats)])
        data = csv
        if name.endswith("_parquet"):
            data = csv.with_suffix(".parquet")
            if not data.exists():
                venv()
                sh([str(VENV / "bin" / "python"), "-c",
                    "import sys, pyarrow as pa, pyarrow.csv as c, pyarrow.parquet as q; "
                    "t = c.read_csv(sys.argv[1], convert_options=c.ConvertOptions(column_types={'id': pa.string()})); "
                    "q.write_table(t, sys.argv[2], compression='snappy', row_group_size=131072)",
                    str(csv), str(data)])
        (DATA / f"{name}.assort").write_text(
            f'recipe "bench-{name}"\nseed 1\ninput "{data.name}" key id\nfeatures all\n{CASES[name][2]}'
        )
    if any(CASES[c][3] for c in cases):
        venv()


def venv():
    """The pinned reference environment, made once."""
    python = VENV / "bin" / "python"
    if not python.exists():
        sh([sys.executable, "-m", "venv", str(VENV)])
        sh([str(python), "-m", "pip", "install", "--quiet", "-r", str(HERE / "requirements.txt")])


def timed(cmd):
    """Wall seconds, peak resident MiB and standard output of one child."""
    start = time.perf_counter()
    with tempfile.TemporaryFile() as out, tempfile.TemporaryFile() as err:
        child = subprocess.Popen(cmd, cwd=DATA, stdout=out, stderr=err)
        _, status, usage = os.wait4(child.pid, 0)
        wall = time.perf_counter() - start
        out.seek(0)
        err.seek(0)
        if os.waitstatus_to_exitcode(status) != 0:
            raise SystemExit(f"{' '.join(map(str, cmd))} failed:\n{err.read().decode(errors='replace')}")
        return wall, usage.ru_maxrss / 1024.0, out.read()


def measure(name, repeats):
    n, d, _, ref, what = CASES[name]
    csv = DATA / f"d{n}_{d}.csv"
    ours = [str(ASSORT), "run", "--json", f"{name}.assort"]
    theirs = [str(VENV / "bin" / "python"), str(HERE / "reference.py"), ref[0], str(csv)] + [str(a) for a in ref[1:]] if ref else None
    a, r = [], []
    for _ in range(repeats):
        a.append(timed(ours))
        if theirs:
            r.append(timed(theirs))
    med = lambda runs, i: statistics.median(x[i] for x in runs)
    results = [json.loads(x[2])["result"] for x in a]
    sweep = results[-1]["sweep"]
    # Each stage's median over the runs, with the peak when it ended.
    stage_names = [s["stage"] for s in results[-1]["stages"]]
    stages = {st: (statistics.median(next(s["seconds"] for s in r["stages"] if s["stage"] == st) for r in results),
                   (results[-1]["stages"][i]["peak_bytes"] or 0) / 2**20)
              for i, st in enumerate(stage_names)}
    row = {"case": name, "what": what, "n": n, "d": d, "assort_s": med(a, 0), "assort_mib": med(a, 1),
           "within_ss": {r["k"]: r["within_ss"] for r in sweep}, "stages": stages}
    if r:
        row.update(ref_s=med(r, 0), ref_mib=med(r, 1))
    return row


def main():
    p = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("--cases", default=",".join(CASES))
    p.add_argument("--repeats", type=int, default=3)
    args = p.parse_args()
    cases = [c for c in args.cases.split(",") if c]
    unknown = [c for c in cases if c not in CASES]
    if unknown:
        raise SystemExit(f"unknown cases: {unknown}; known: {list(CASES)}")
    prepare(cases)
    cpu = next((l.split(":", 1)[1].strip() for l in open("/proc/cpuinfo") if l.startswith("model name")), "?")
    print(f"machine: {platform.machine()}, {os.cpu_count()} cores, {cpu}; {platform.platform()}")
    print(f"medians of {args.repeats} runs each, taken alternately; ratio = reference / assort\n")
    print("| case | records x features | assort s | assort MiB | reference s | reference MiB | time ratio | memory ratio |")
    print("|---|---|---|---|---|---|---|---|")
    rows = {}
    for name in cases:
        row = measure(name, args.repeats)
        ref = "ref_s" in row
        cells = [
            f"{name}: {row['what']}",
            f"{row['n']:,} x {row['d']}",
            f"{row['assort_s']:.2f}",
            f"{row['assort_mib']:.0f}",
            f"{row['ref_s']:.2f}" if ref else "–",
            f"{row['ref_mib']:.0f}" if ref else "–",
            f"{row['ref_s'] / row['assort_s']:.2f}x" if ref else "–",
            f"{row['ref_mib'] / row['assort_mib']:.2f}x" if ref else "–",
        ]
        print("| " + " | ".join(cells) + " |", flush=True)
        rows[name] = row
    print("\nwhere assort's time went (median seconds per stage; peak MiB when it ended)\n")
    for name, row in rows.items():
        parts = [f"{st} {sec:.2f} s ({peak:.0f} MiB)" for st, (sec, peak) in row["stages"].items()]
        print(f"- {name}: " + "; ".join(parts))
    if "sweep1m" in rows and "sweep1m_sampled" in rows:
        full, sampled = rows["sweep1m"]["within_ss"], rows["sweep1m_sampled"]["within_ss"]
        print("\nwithin-SS at 1,000,000 x 16: full batch against restarts on a sample of 200,000\n")
        print("| k | full batch | sampled, refined | sampled / full - 1 |")
        print("|---|---|---|---|")
        for k in sorted(full):
            print(f"| {k} | {full[k]:,.1f} | {sampled[k]:,.1f} | {sampled[k] / full[k] - 1:+.2e} |")


if __name__ == "__main__":
    main()

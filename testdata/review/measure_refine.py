#!/usr/bin/python3
"""Does a round of review help the cells not yet reviewed, through refine?

Usage: measure_refine.py FERRY SCENARIO_DIR [N] [--no-cell-sd]

The refine variant of measure.py: refines the scenario's landmarks with its
cells and candidates (refine's defaults, --cell-sd from the scenario's
scenario.json as the demo gives it) and matches its cells (arm a); when
refine refuses (exit 3), the user's transform is the landmark fit (fit), and
the arm says so. Takes the N (default 20) cells of lowest confidence of that
match, in the order ferry review shows them (ambiguous first, then by the
probability of the proposed choice, lowest first); writes decisions for them
from the scenario's truth (accepted: the true candidate; none: the cell has
no counterpart); refines again with refine --decisions and matches with
match --decisions (arm b; same fallback). Prints, over the cells NOT
decided, how many are matched to their true candidate, and how many
wrongly, in each arm. With --no-cell-sd, refine and match run without
--cell-sd (the landmarks' picking noise stands in for the cells').
"""
import csv, json, os, subprocess, sys

ferry, d = sys.argv[1], sys.argv[2]
n = int(sys.argv[3]) if len(sys.argv) > 3 else 20
no_sd = "--no-cell-sd" in sys.argv[4:]
out = os.path.join(d, "measure_refine" + ("_no_sd" if no_sd else ""))
os.makedirs(out, exist_ok=True)

def run(*args, ok=(0,)):
    r = subprocess.run([ferry, *args], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    if r.returncode not in ok:
        raise SystemExit(f"ferry {' '.join(args)}: exit {r.returncode}")
    return r.returncode

def rows(path):
    with open(path) as f:
        return list(csv.DictReader(line for line in f if not line.startswith("#")))

with open(os.path.join(d, "scenario.json")) as f:
    sd = json.load(f)["params"]["cell_sd_um"]
sd_flag = [] if no_sd else ["--cell-sd", ",".join(f"{x:g}" for x in sd)]
truth = {r["id"]: r["true_candidate"] for r in rows(os.path.join(d, "truth_cells.csv"))}
L, C, N = (os.path.join(d, x) for x in ("landmarks.csv", "cells.csv", "candidates.csv"))
o = lambda x: os.path.join(out, x)
run("fit", L, "-o", o("fit.json"))

def refine_match(tag, extra_refine, extra_match):
    rc = run("refine", L, C, N, *sd_flag, *extra_refine, "-o", o(f"r{tag}.json"), ok=(0, 3))
    t = o(f"r{tag}.json") if rc == 0 else o("fit.json")
    run("match", t, C, N, *sd_flag, *extra_match, "-o", o(f"m{tag}.csv"))
    return rows(o(f"m{tag}.csv")), rc == 3

m0, refused0 = refine_match("0", [], [])

def confidence(r):
    p = float(r["p_match"]) if r["p_match"] else float(r["p_none"])
    return (0 if r["status"] == "ambiguous" else 1, p, r["id"])

chosen = sorted(m0, key=confidence)[:n]
dec = o("decisions.csv")
with open(dec, "w", newline="") as f:
    w = csv.writer(f, lineterminator="\n")
    w.writerow(["id", "candidate", "decision", "decided_at", "note"])
    for r in chosen:
        t = truth[r["id"]]
        w.writerow([r["id"], t, "accepted" if t else "none", "", "from the truth"])
decided = {r["id"] for r in chosen}
m1, refused1 = refine_match("1", ["--decisions", dec], ["--decisions", dec])

def tally(ms):
    right = wrong = 0
    for r in ms:
        if r["id"] in decided or r["status"] != "matched":
            continue
        if r["candidate"] == truth[r["id"]]:
            right += 1
        else:
            wrong += 1
    return right, wrong

accepted = sum(1 for r in chosen if truth[r["id"]])
r0, w0 = tally(m0)
r1, w1 = tally(m1)
note = lambda refused: " (refine refused: fit's transform)" if refused else ""
print(f"{os.path.basename(os.path.normpath(d))}: {accepted} accepted, {len(chosen) - accepted} none, "
      f"{len(m0) - len(decided)} not decided; refine+match right {r0} wrong {w0}{note(refused0)}; "
      f"refine --decisions+match --decisions right {r1} wrong {w1}{note(refused1)}")

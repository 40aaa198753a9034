#!/usr/bin/python3
"""Does a round of review help the cells not yet reviewed?

Usage: measure.py FERRY SCENARIO_DIR [N]

Fits the scenario's landmarks and matches its cells; takes the N (default 20)
cells of lowest confidence, in the order ferry review shows them (ambiguous
first, then by the probability of the proposed choice, lowest first); writes
decisions for them from the scenario's truth (accepted: the true candidate;
none: the cell has no counterpart); fits again with fit --decisions and
matches with match --decisions. Prints, over the cells NOT decided, how many
are matched to their true candidate before and after, and how many are
matched wrongly.
"""
import csv, os, subprocess, sys

ferry, d = sys.argv[1], sys.argv[2]
n = int(sys.argv[3]) if len(sys.argv) > 3 else 20
out = os.path.join(d, "measure")
os.makedirs(out, exist_ok=True)

def run(*args):
    subprocess.run([ferry, *args], check=True, stdout=subprocess.DEVNULL)

def rows(path):
    with open(path) as f:
        return list(csv.DictReader(line for line in f if not line.startswith("#")))

truth = {r["id"]: r["true_candidate"] for r in rows(os.path.join(d, "truth_cells.csv"))}
L, C, N = (os.path.join(d, x) for x in ("landmarks.csv", "cells.csv", "candidates.csv"))
run("fit", L, "-o", os.path.join(out, "t0.json"))
run("match", os.path.join(out, "t0.json"), C, N, "-o", os.path.join(out, "m0.csv"))
m0 = rows(os.path.join(out, "m0.csv"))

def confidence(r):
    p = float(r["p_match"]) if r["p_match"] else float(r["p_none"])
    return (0 if r["status"] == "ambiguous" else 1, p, r["id"])

chosen = sorted(m0, key=confidence)[:n]
dec = os.path.join(out, "decisions.csv")
with open(dec, "w", newline="") as f:
    w = csv.writer(f, lineterminator="\n")
    w.writerow(["id", "candidate", "decision", "decided_at", "note"])
    for r in chosen:
        t = truth[r["id"]]
        w.writerow([r["id"], t, "accepted" if t else "none", "", "from the truth"])
decided = {r["id"] for r in chosen}
run("fit", L, "--decisions", dec, "--cells", C, "--candidates", N, "-o", os.path.join(out, "t1.json"))
run("match", os.path.join(out, "t1.json"), C, N, "--decisions", dec, "-o", os.path.join(out, "m1.csv"))
m1 = rows(os.path.join(out, "m1.csv"))

def tally(ms):
    right = wrong = amb_right = 0
    for r in ms:
        if r["id"] in decided:
            continue
        t = truth[r["id"]]
        if r["status"] == "matched":
            if r["candidate"] == t:
                right += 1
            else:
                wrong += 1
        elif r["status"] == "ambiguous" and r["candidate"] == t:
            amb_right += 1
    return right, wrong, amb_right

accepted = sum(1 for r in chosen if truth[r["id"]])
print(f"{len(chosen)} cells decided from the truth ({accepted} accepted, {len(chosen) - accepted} none); "
      f"{len(m0) - len(decided)} cells not decided")
for name, ms in (("without decisions", m0), ("fit --decisions, match --decisions", m1)):
    right, wrong, amb = tally(ms)
    print(f"  {name}: {right} matched right, {wrong} matched wrong, {amb} ambiguous with the right candidate proposed")

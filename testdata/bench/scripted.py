#!/usr/bin/python3
"""The scripted routes that ferry's speed targets are measured against
(docs/benchmarks.md), in NumPy/SciPy as a user would write them.

    /usr/bin/python3 testdata/bench/scripted.py map LANDMARKS.csv CELLS.csv OUT.csv [SMOOTHING]
    /usr/bin/python3 testdata/bench/scripted.py loo LANDMARKS.csv [SMOOTHING]

map: fit the 3-D thin-plate spline of ferry's contract (phi(r) = -r, affine
part, smoothing S: scipy.interpolate.RBFInterpolator with kernel 'linear',
degree 1) to the landmark pairs, map every cell's position through it and
write the positions as CSV, positions only (no uncertainty).

loo: the brute-force leave-one-out of the same spline: one refit without
each landmark in turn, its error at the landmark left out; prints the RMS
and the largest error (um).

Both read ferry's landmark table (columns source_x..target_z, a header row,
'#' lines skipped) and ferry's cells table (columns x, y, z). Time the
whole process, e.g. with /usr/bin/time, in the same session as the ferry
command it is compared with.
"""

import sys

import numpy as np
from scipy.interpolate import RBFInterpolator


def read_landmarks(path):
    with open(path) as f:
        lines = [l for l in f if not l.startswith("#")]
    head = lines[0].strip().split(",")
    cols = [head.index(c) for c in
            ("source_x", "source_y", "source_z", "target_x", "target_y", "target_z")]
    rows = [l.strip().split(",") for l in lines[1:] if l.strip()]
    a = np.array([[float(r[c]) for c in cols] for r in rows])
    return a[:, :3], a[:, 3:]


def main():
    what = sys.argv[1]
    if what == "map":
        src, dst = read_landmarks(sys.argv[2])
        s = float(sys.argv[5]) if len(sys.argv) > 5 else 0.0
        head = open(sys.argv[3]).readline().strip().split(",")
        cols = [head.index(c) for c in ("x", "y", "z")]
        cells = np.loadtxt(sys.argv[3], delimiter=",", skiprows=1, usecols=cols)
        ids = np.loadtxt(sys.argv[3], delimiter=",", skiprows=1, usecols=[0], dtype=str)
        f = RBFInterpolator(src, dst, kernel="linear", degree=1, smoothing=s)
        out = f(cells)
        with open(sys.argv[4], "w") as o:
            o.write("id,target_x_um,target_y_um,target_z_um\n")
            for i, p in zip(ids, out):
                o.write("%s,%.4f,%.4f,%.4f\n" % (i, p[0], p[1], p[2]))
    elif what == "loo":
        src, dst = read_landmarks(sys.argv[2])
        s = float(sys.argv[3]) if len(sys.argv) > 3 else 0.0
        n = len(src)
        err = np.empty(n)
        for i in range(n):
            keep = np.arange(n) != i
            f = RBFInterpolator(src[keep], dst[keep], kernel="linear", degree=1, smoothing=s)
            err[i] = np.linalg.norm(dst[i] - f(src[i:i + 1])[0])
        print("rms %.4f um, max %.4f um over %d landmarks" % (np.sqrt(np.mean(err ** 2)), err.max(), n))
    else:
        sys.exit("want map or loo")


if __name__ == "__main__":
    main()

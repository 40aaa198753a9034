#!/usr/bin/python3
"""Reference values for ferry's thin-plate spline, from SciPy.

Run with Debian's interpreter, which has SciPy 1.10 and NumPy:

    /usr/bin/python3 testdata/reference/rbf_reference.py          # (re)write rbf_reference.json
    /usr/bin/python3 testdata/reference/rbf_reference.py --check  # compare with the committed file

Each case is a few dozen landmark pairs through a smooth warp, fitted by
scipy.interpolate.RBFInterpolator with degree=1 and kernel 'linear'
(phi(r) = -r, the 3-D spline of the contract) or 'thin_plate_spline'
(phi(r) = r^2 log r, the 2-D one), at smoothing 0 and above, and evaluated at
query points in and around the landmarks. SciPy solves

    (K + diag(smoothing)) a + P b = d,   P^T a = 0

with K built from raw coordinates (it shifts and scales only the polynomial
columns, which spans the same affine functions), so its scalar smoothing is
the contract's S exactly. For the weighted case the per-point smoothing
array S * mean(w) / w_i is passed, the contract's S * D of ferry's
transform/tps.go. Coordinates are micrometres; two cases sit near 1e4 um to
exercise ferry's centring.

The inputs are rounded to 12 significant digits before SciPy sees them, so
the Go test (transform/reference_test.go), which reads the rounded values,
fits exactly the same problem. Every number is written with %.12g and the
layout is fixed, so rewriting the file on the same machine gives the same
bytes. --check regenerates into memory and exits 1, printing the largest
difference, if any number of the committed file differs by more than 1e-9
of the largest magnitude in its array.
"""

import json
import os
import sys

import numpy as np
import scipy
from scipy.interpolate import RBFInterpolator

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "rbf_reference.json")
SEED = 20240601
CHECK_TOL = 1e-9


def r12(x):
    """Round to 12 significant digits, as the file stores numbers."""
    return np.vectorize(lambda v: float("%.12g" % v))(np.asarray(x, dtype=float))


def warp(p, origin, extent):
    """A smooth non-affine map: a slight rotation and stretch plus
    sinusoidal displacements of a few per cent of the extent."""
    t = (p - origin) / extent
    dim = p.shape[1]
    if dim == 3:
        a = np.array([[1.03, -0.06, 0.02], [0.05, 0.98, 0.03], [-0.02, -0.01, 1.02]])
        d = np.stack([
            0.04 * np.sin(2.3 * t[:, 1] + 0.2) + 0.02 * t[:, 0] * t[:, 2],
            0.03 * np.cos(1.9 * t[:, 0] - 0.4 * t[:, 2]),
            0.025 * np.sin(1.1 * t[:, 0] + 1.7 * t[:, 1]) - 0.02 * t[:, 2] ** 2,
        ], axis=1)
        shift = np.array([15.0, -8.0, 4.0])
    else:
        a = np.array([[1.04, -0.07], [0.06, 0.97]])
        d = np.stack([
            0.04 * np.sin(2.3 * t[:, 1] + 0.2) + 0.03 * t[:, 0] * t[:, 1],
            0.035 * np.cos(1.9 * t[:, 0]) - 0.02 * t[:, 1] ** 2,
        ], axis=1)
        shift = np.array([15.0, -8.0])
    return origin + extent * (t @ a.T + d) + shift


CASES = [
    # name, dim, n, origin (um), smoothing S, weighted, target noise SD (um)
    ("3d_linear_s0", 3, 36, 0.0, 0.0, False, 0.0),
    ("3d_linear_smooth_offset", 3, 40, 1e4, 25.0, False, 1.5),
    ("3d_linear_weighted_offset", 3, 40, 1e4, 25.0, True, 1.5),
    ("2d_tps_s0", 2, 30, 0.0, 0.0, False, 0.0),
    ("2d_tps_smooth_offset", 2, 36, 1e4, 4000.0, False, 1.5),
    ("2d_tps_weighted", 2, 36, 0.0, 4000.0, True, 1.5),
]
EXTENT = 400.0
QUERIES = 25


def build():
    rng = np.random.default_rng(SEED)
    cases = []
    for name, dim, n, origin, smoothing, weighted, noise in CASES:
        o = np.full(dim, origin)
        src = r12(o + EXTENT * rng.random((n, dim)))
        dst = r12(warp(src, o, EXTENT) + noise * rng.standard_normal((n, dim)))
        weights = r12(10 ** rng.random(n)) if weighted else None
        query = r12(o - 0.1 * EXTENT + 1.2 * EXTENT * rng.random((QUERIES, dim)))
        if weights is None:
            s = smoothing
        else:
            s = smoothing * weights.mean() / weights
        kernel = "linear" if dim == 3 else "thin_plate_spline"
        interp = RBFInterpolator(src, dst, kernel=kernel, degree=1, smoothing=s)
        cases.append({
            "name": name,
            "dim": dim,
            "kernel": kernel,
            "smoothing": smoothing,
            "weights": None if weights is None else weights.tolist(),
            "source": src.tolist(),
            "target": dst.tolist(),
            "query": query.tolist(),
            "predicted": interp(query).tolist(),
        })
    return {
        "generator": "testdata/reference/rbf_reference.py",
        "scipy": scipy.__version__,
        "numpy": np.__version__,
        "seed": SEED,
        "cases": cases,
    }


def num(v):
    return "%.12g" % v


def render(doc):
    """JSON with a fixed layout: one point per line, %.12g numbers."""
    out = ["{"]
    out.append('  "generator": %s,' % json.dumps(doc["generator"]))
    out.append('  "scipy": %s,' % json.dumps(doc["scipy"]))
    out.append('  "numpy": %s,' % json.dumps(doc["numpy"]))
    out.append('  "seed": %d,' % doc["seed"])
    out.append('  "cases": [')
    for ci, c in enumerate(doc["cases"]):
        out.append("    {")
        out.append('      "name": %s,' % json.dumps(c["name"]))
        out.append('      "dim": %d,' % c["dim"])
        out.append('      "kernel": %s,' % json.dumps(c["kernel"]))
        out.append('      "smoothing": %s,' % num(c["smoothing"]))
        if c["weights"] is None:
            out.append('      "weights": null,')
        else:
            out.append('      "weights": [%s],' % ", ".join(num(w) for w in c["weights"]))
        keys = ["source", "target", "query", "predicted"]
        for ki, key in enumerate(keys):
            out.append('      "%s": [' % key)
            rows = c[key]
            for ri, row in enumerate(rows):
                sep = "," if ri < len(rows) - 1 else ""
                out.append("        [%s]%s" % (", ".join(num(v) for v in row), sep))
            out.append("      ]%s" % ("," if ki < len(keys) - 1 else ""))
        out.append("    }%s" % ("," if ci < len(doc["cases"]) - 1 else ""))
    out.append("  ]")
    out.append("}")
    return "\n".join(out) + "\n"


def compare(fresh, committed):
    """Return (largest relative difference, where) between two documents;
    structural mismatches count as infinite."""
    worst, where = 0.0, "nothing"
    fc, cc = fresh["cases"], committed.get("cases", [])
    if len(fc) != len(cc):
        return float("inf"), "number of cases: %d regenerated, %d committed" % (len(fc), len(cc))
    for a, b in zip(fc, cc):
        for key in ("name", "dim", "kernel"):
            if a[key] != b.get(key):
                return float("inf"), "case %s: %s %r regenerated, %r committed" % (a["name"], key, a[key], b.get(key))
        for key in ("smoothing", "weights", "source", "target", "query", "predicted"):
            x, y = a[key], b.get(key)
            if (x is None) != (y is None):
                return float("inf"), "case %s: %s present in only one file" % (a["name"], key)
            if x is None:
                continue
            x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
            if x.shape != y.shape:
                return float("inf"), "case %s: %s has shape %s regenerated, %s committed" % (a["name"], key, x.shape, y.shape)
            scale = max(np.abs(x).max(), np.abs(y).max(), 1e-300)
            d = np.abs(x - y).max() / scale
            if d > worst:
                worst, where = d, "case %s, %s" % (a["name"], key)
    return worst, where


def main(argv):
    if len(argv) > 1 and argv[1] not in ("--check",):
        print("usage: rbf_reference.py [--check]", file=sys.stderr)
        return 2
    doc = build()
    if len(argv) > 1:
        try:
            with open(OUT, encoding="utf-8") as f:
                committed = json.load(f)
        except (OSError, ValueError) as e:
            print("cannot read %s: %s" % (OUT, e), file=sys.stderr)
            return 1
        worst, where = compare(doc, committed)
        if committed.get("scipy") != doc["scipy"]:
            print("note: file made with SciPy %s, this is %s" % (committed.get("scipy"), doc["scipy"]))
        print("largest relative difference %.3g (%s)" % (worst, where))
        if not worst <= CHECK_TOL:
            print("%s drifted by more than %g: regenerate it and review the change" % (OUT, CHECK_TOL), file=sys.stderr)
            return 1
        return 0
    text = render(doc)
    tmp = OUT + ".tmp"
    with open(tmp, "w", encoding="utf-8") as f:
        f.write(text)
    os.replace(tmp, OUT)
    print("wrote %s (%d cases)" % (OUT, len(doc["cases"])))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))

#!/usr/bin/python3
"""Reference values for ferry warp, from SciPy's map_coordinates.

Run with Debian's interpreter, which has SciPy and NumPy:

    /usr/bin/python3 testdata/reference/warp_reference.py          # (re)write warp_reference.json
    /usr/bin/python3 testdata/reference/warp_reference.py --check  # compare with the committed file

Each case is a small stack whose voxel values follow a known pattern of the
voxel index (i, j, k), placed in its space by a voxel size and an origin, a
transform, and an output grid (origin, voxel size, size). For every output
voxel q = origin + (i*vx, j*vy, k*vz) the position in the stack's space is
computed independently of ferry:

  - "affine forward": p = A^-1 (q - t) with numpy.linalg.solve (the output
    is in the target frame, the stack in the source frame);
  - "spline inverse": p = spline(q), the 3-D thin-plate spline of the
    contract (kernel -r, degree 1, smoothing 0) fitted and evaluated by
    scipy.interpolate.RBFInterpolator (the output is in the source frame,
    the stack in the target frame, as ferry warp --inverse);
  - "spline forward": p = spline^-1(q), found by scipy.optimize.fsolve on
    the RBFInterpolator's spline, so that ferry's Newton inverse is checked
    too.

The stack is sampled at p with scipy.ndimage.map_coordinates(order=1,
mode='nearest'): trilinear interpolation between voxel centres, the edge
voxels extended over the outer half voxel, which is ferry's convention;
outside the stack's box (beyond half a voxel from the outer voxel centres)
ferry writes 0, and so does this script. Values are rounded half up, as
ferry rounds. An output voxel whose position lies within 1e-6 voxel of the
box's faces is written as -1 and skipped by the Go test: there the two
programs may fairly disagree on inside and outside.

The Go test (imaging/warp_reference_test.go) reads the committed
file, so go test needs no Python. --check regenerates into memory and exits
1 when any expected value differs from the committed one by more than 1 (a
rounding tie), or anything else differs.
"""

import json
import os
import sys

import numpy as np
import scipy
from scipy.interpolate import RBFInterpolator
from scipy.ndimage import map_coordinates
from scipy.optimize import fsolve

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "warp_reference.json")
SEED = 20261202


def pattern(kind, size):
    """The pattern of make_images.py, indexed [k, j, i]."""
    w, h, d = size
    k, j, i = np.meshgrid(np.arange(d), np.arange(h), np.arange(w), indexing="ij")
    if kind == "pattern8":
        return ((7 * i + 11 * j + 37 * k + 3) % 256).astype(float)
    return ((263 * i + 4099 * j + 16411 * k + 12345) % 65536).astype(float)


def r12(x):
    return np.vectorize(lambda v: float("%.12g" % v))(np.asarray(x, dtype=float))


def sample(case, positions):
    """Trilinear values of the case's stack at positions (n, 3) in µm."""
    data = pattern(case["pattern"], case["stack_size"])
    voxel = np.asarray(case["stack_voxel_um"])
    origin = np.asarray(case["stack_origin_um"])
    u = (positions - origin) / voxel  # voxel coordinates (i, j, k)
    n = np.asarray(case["stack_size"], dtype=float)
    values = map_coordinates(data, [u[:, 2], u[:, 1], u[:, 0]], order=1, mode="nearest")
    values = np.floor(values + 0.5)
    inside = np.all((u >= -0.5) & (u < n - 0.5), axis=1)
    edge = np.any((np.abs(u + 0.5) < 1e-6) | (np.abs(u - (n - 0.5)) < 1e-6), axis=1)
    values[~inside] = 0
    values[edge] = -1
    return values.astype(int)


def grid_points(case):
    w, h, d = case["out_size"]
    k, j, i = np.meshgrid(np.arange(d), np.arange(h), np.arange(w), indexing="ij")
    idx = np.stack([i.ravel(), j.ravel(), k.ravel()], axis=1).astype(float)
    return np.asarray(case["out_origin_um"]) + idx * np.asarray(case["out_voxel_um"])


def build():
    rng = np.random.default_rng(SEED)
    cases = []

    affine = {
        "name": "affine forward",
        "pattern": "pattern16", "stack_size": [12, 10, 6],
        "stack_voxel_um": [2.0, 1.5, 3.0], "stack_origin_um": [1.0, -2.0, 0.5],
        "matrix": [[0.9, 0.1, 0.05], [-0.08, 1.1, 0.02], [0.03, -0.04, 0.95]],
        "offset": [3.0, -1.0, 2.0],
        "out_origin_um": [-2.0, -5.0, -1.0], "out_voxel_um": [1.7, 1.3, 2.2], "out_size": [17, 15, 10],
        "inverse": False,
    }
    q = grid_points(affine)
    a, t = np.asarray(affine["matrix"]), np.asarray(affine["offset"])
    p = np.linalg.solve(a, (q - t).T).T
    affine["expected"] = sample(affine, p).tolist()
    cases.append(affine)

    # A thin-plate spline through 20 landmarks of a smooth warp.
    src = r12(rng.uniform([0, 0, 0], [24, 18, 20], size=(20, 3)))
    dst = r12(src @ np.array([[1.02, 0.05, 0.0], [-0.04, 0.97, 0.03], [0.02, 0.0, 1.05]]).T
              + np.array([1.5, -0.5, 1.0])
              + 0.8 * np.stack([np.sin(src[:, 1] / 5), np.cos(src[:, 0] / 6), np.sin(src[:, 2] / 4)], axis=1))
    spline = RBFInterpolator(src, dst, kernel="linear", degree=1, smoothing=0.0)

    inverse = {
        "name": "spline inverse",
        "pattern": "pattern8", "stack_size": [11, 9, 5],
        "stack_voxel_um": [2.5, 2.0, 4.5], "stack_origin_um": [0.0, 0.0, 0.0],
        "source": src.tolist(), "target": dst.tolist(),
        "out_origin_um": [-1.0, 0.5, 0.0], "out_voxel_um": [1.9, 1.6, 2.5], "out_size": [15, 12, 9],
        "inverse": True,
    }
    inverse["expected"] = sample(inverse, spline(grid_points(inverse))).tolist()
    cases.append(inverse)

    forward = {
        "name": "spline forward",
        "pattern": "pattern16", "stack_size": [10, 9, 6],
        "stack_voxel_um": [2.5, 2.0, 3.5], "stack_origin_um": [0.5, 0.0, 1.0],
        "source": src.tolist(), "target": dst.tolist(),
        "out_origin_um": [1.0, -1.0, 0.5], "out_voxel_um": [2.1, 1.7, 2.6], "out_size": [13, 11, 8],
        "inverse": False,
    }
    q = grid_points(forward)
    p = np.empty_like(q)
    for n, x in enumerate(q):
        p[n] = fsolve(lambda y: spline(y[None, :])[0] - x, x, xtol=1e-13)
    forward["expected"] = sample(forward, p).tolist()
    cases.append(forward)
    return {"generator": "testdata/reference/warp_reference.py", "scipy": scipy.__version__,
            "numpy": np.__version__, "cases": cases}


def render(doc):
    """Stable text: one key per line, each array on one line."""
    out = ["{"]
    out.append('  "generator": %s,' % json.dumps(doc["generator"]))
    out.append('  "scipy": %s,' % json.dumps(doc["scipy"]))
    out.append('  "numpy": %s,' % json.dumps(doc["numpy"]))
    out.append('  "cases": [')
    for ci, c in enumerate(doc["cases"]):
        out.append("    {")
        keys = list(c.keys())
        for ki, key in enumerate(keys):
            sep = "," if ki < len(keys) - 1 else ""
            v = c[key]
            if isinstance(v, list) and v and isinstance(v[0], list):
                text = "[" + ", ".join("[" + ", ".join("%.12g" % x for x in row) + "]" for row in v) + "]"
            else:
                text = json.dumps(v)
            out.append('      %s: %s%s' % (json.dumps(key), text, sep))
        out.append("    }%s" % ("," if ci < len(doc["cases"]) - 1 else ""))
    out.append("  ]")
    out.append("}")
    return "\n".join(out) + "\n"


def compare(fresh, committed):
    fc, cc = fresh["cases"], committed.get("cases", [])
    if len(fc) != len(cc):
        return "number of cases: %d regenerated, %d committed" % (len(fc), len(cc))
    for a, b in zip(fc, cc):
        for key, x in a.items():
            y = b.get(key)
            if key == "expected":
                x, y = np.asarray(x), np.asarray(y)
                if x.shape != y.shape:
                    return "case %s: %d expected values regenerated, %d committed" % (a["name"], x.size, y.size)
                d = np.abs(x - y).max()
                if d > 1:
                    return "case %s: an expected value differs by %d" % (a["name"], d)
            elif json.loads(json.dumps(x)) != y and not np.allclose(np.asarray(x, dtype=float), np.asarray(y, dtype=float), rtol=1e-11, atol=0):
                return "case %s: %s differs" % (a["name"], key)
    return None


def main(argv):
    if len(argv) > 1 and argv[1] != "--check":
        print("usage: warp_reference.py [--check]", file=sys.stderr)
        return 2
    doc = build()
    if len(argv) > 1:
        try:
            with open(OUT, encoding="utf-8") as f:
                committed = json.load(f)
        except (OSError, ValueError) as e:
            print("cannot read %s: %s" % (OUT, e), file=sys.stderr)
            return 1
        why = compare(doc, committed)
        if why:
            print("%s drifted: %s; regenerate it and review the change" % (OUT, why), file=sys.stderr)
            return 1
        n = sum(len(c["expected"]) for c in doc["cases"])
        print("%s: %d expected values regenerate unchanged" % (OUT, n))
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

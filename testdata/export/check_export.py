#!/usr/bin/python3
"""Outside checks of what `ferry export` writes.

    /usr/bin/python3 testdata/export/check_export.py SPEC_DIR EXPORT_DIR POINTS.json

SPEC_DIR is the OME-NGFF specification's folder (OME-NGFF specification 0.6,
ome/ngff-spec, with schemas/ and tests/; see its SOURCE.md). With Debian's
python3-jsonschema (4.10, Draft 2020-12, references resolved from the
schemas' own $id by a RefResolver store, as the specification's
conformance/jsonschema_dingus.py does with the newer `referencing`):

1. the validator itself is checked on the specification's conformance
   cases (tests/attributes/spec/{valid,invalid}/{scene,transforms}): every
   valid case must pass the generic ome_zarr.schema and every invalid one
   fail it, so that a pass below means something;
2. the root group's attributes (transform.zarr/zarr.json) must validate
   against ome_zarr.schema and scene.schema, and the displacement field's
   group against ome_zarr.schema and image.schema.

With python3-tifffile and python3-scipy:

3. displacement_um.tif is read by tifffile, which must find an ImageJ
   hyperstack (Z, C, Y, X) whose spacing, resolution and origin are the
   grid's in export.json; each point of POINTS.json (source µm, x y z) is
   mapped as x + D(x) with D interpolated by
   scipy.ndimage.map_coordinates(order=1).

Prints one JSON object: {"schema_cases": n, "tiff_points": [[x', y', z'],
...]} for the Go test (register/export/outside_test.go) to compare with the
spline; exits 1 with a message on any failure.
"""
import json
import pathlib
import sys

import jsonschema
import numpy
import scipy.ndimage
import tifffile


def load_schemas(spec):
    store = {}
    for p in sorted((spec / "schemas").glob("*.schema")):
        s = json.loads(p.read_text())
        store[s["$id"]] = s
    return store


def validator(store, name):
    sid = "https://ngff.openmicroscopy.org/0.6rc0/schemas/" + name
    schema = store[sid]
    resolver = jsonschema.RefResolver(base_uri=sid, referrer=schema, store=store)
    return jsonschema.Draft202012Validator(schema, resolver=resolver)


def fail(msg):
    print(msg, file=sys.stderr)
    sys.exit(1)


def main():
    spec, out, points_path = (pathlib.Path(a) for a in sys.argv[1:4])
    store = load_schemas(spec)
    generic = validator(store, "ome_zarr.schema")

    cases = 0
    for validity in ("valid", "invalid"):
        for group in ("scene", "transforms"):
            for p in sorted((spec / "tests/attributes/spec" / validity / group).glob("*.json")):
                doc = json.loads(p.read_text())
                doc.pop("_conformance", None)
                ok = generic.is_valid(doc)
                if ok != (validity == "valid"):
                    fail(f"the validator calls the specification's {validity} case {p.name} {'valid' if ok else 'invalid'}")
                cases += 1
    if cases < 10:
        fail(f"only {cases} conformance cases found under {spec}/tests")

    zarr_dir = out / "transform.zarr"
    root = json.loads((zarr_dir / "zarr.json").read_text())
    field_group = json.loads((zarr_dir / "coordinateTransformations/displacements/zarr.json").read_text())
    for doc, specific in ((root, "scene.schema"), (field_group, "image.schema")):
        attrs = doc["attributes"]
        for v in (generic, validator(store, specific)):
            errors = sorted(v.iter_errors(attrs), key=str)
            if errors:
                fail(f"{specific}: {errors[0].message} at {list(errors[0].absolute_path)}")

    manifest = json.loads((out / "export.json").read_text())
    grid = manifest["displacement_field"]
    origin, spacing = grid["origin_um"], grid["spacing_um"]
    dim = manifest["dim"]
    with tifffile.TiffFile(out / "displacement_um.tif") as tif:
        if not tif.is_imagej:
            fail("tifffile finds no ImageJ metadata")
        ij = tif.imagej_metadata
        series = tif.series[0]
        data = series.asarray().astype(numpy.float64)
        axes = series.axes
        xres = tif.pages[0].tags["XResolution"].value
    want_axes = "ZCYX" if grid["size"][2] > 1 else "CYX"
    if axes != want_axes:
        fail(f"tifffile reads axes {axes}, want {want_axes}")
    if data.ndim == 3:
        data = data[numpy.newaxis]
    if abs(xres[1] / xres[0] - spacing[0]) > 1e-6 * spacing[0]:
        fail(f"XResolution {xres} is not 1/{spacing[0]} µm")
    if grid["size"][2] > 1 and abs(float(ij["spacing"]) - spacing[2]) > 1e-9 * spacing[2]:
        fail(f"ImageJ spacing {ij['spacing']}, want {spacing[2]}")
    # ImageJ's calibration origin is in pixels: µm = (index - origin) * spacing.
    for k, axis in enumerate("xyz"):
        want = -origin[k] / spacing[k]
        if abs(float(ij.get(axis + "origin", 0)) - want) > 1e-9 * (1 + abs(want)):
            fail(f"ImageJ {axis}origin {ij.get(axis + 'origin')}, want {want}")
    if ij.get("unit") != "micron":
        fail(f"ImageJ unit {ij.get('unit')!r}, want 'micron'")

    pts = numpy.array(json.loads(points_path.read_text()), dtype=numpy.float64)
    # index coordinates (z, y, x) of every point on the grid
    idx = [(pts[:, k] - origin[k]) / spacing[k] for k in range(3)]
    coords = numpy.array([idx[2], idx[1], idx[0]]) if dim == 3 else numpy.array([numpy.zeros(len(pts)), idx[1], idx[0]])
    mapped = pts.copy()
    for c in range(dim):
        d = scipy.ndimage.map_coordinates(data[:, c], coords, order=1, mode="nearest")
        mapped[:, c] += d
    print(json.dumps({"schema_cases": cases, "tiff_points": mapped.tolist()}))


if __name__ == "__main__":
    main()

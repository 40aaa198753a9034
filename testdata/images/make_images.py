#!/usr/bin/python3
"""Write the small test images of ferry/imaging, or verify one.

Run with Debian's interpreter, which has tifffile, numpy and Pillow:

    /usr/bin/python3 testdata/images/make_images.py           # (re)write the files
    /usr/bin/python3 testdata/images/make_images.py --verify testdata/images/go_written8.tif ...

Every pixel value is a known function of its voxel index (i = column,
j = row, k = page, all from 0), so the Go tests can assert exact values:

    pattern8(i, j, k)  = (7 i + 11 j + 37 k + 3) mod 256
    pattern16(i, j, k) = (263 i + 4099 j + 16411 k + 12345) mod 65536

pattern16 changes both bytes of a sample from one voxel to the next, so a
reader that swaps the byte order fails loudly.

The output is deterministic: no dates, no random numbers; running the script
twice gives the same bytes.

--verify reads each named file with tifffile (TIFF) or Pillow (PNG) and checks
that it holds grey 8- or 16-bit planes whose values follow the pattern of their
bit depth; it exits 1 with a message on the first file that does not. Before a
file, --geometry VX,VY,VZ,OX,OY,OZ (micrometres) also checks that the file
records that voxel size and origin the way ImageJ reads them: XResolution and
YResolution in pixels per unit, ResolutionUnit none, and an ImageJ
ImageDescription (as tifffile.imagej_metadata parses it) with unit=micron,
spacing, and xorigin/yorigin/zorigin in pixels, where ImageJ places pixel x at
(x - xorigin) * pixel width. --geometry-only skips the pattern check (for
images that hold pictures, such as ferry simulate's).

Two of the files written carry geometry for ferry's reader: imagej16.tif,
written by tifffile's ImageJ writer (voxel 0.25 x 0.5 x 2 um, xorigin 4 and
zorigin -3 pixels, so the origin is (-1, 0, 6) um), and res_cm8.tif, with
plain TIFF resolution tags of 40000 pixels per centimetre (0.25 um pixels)
and no ImageJ metadata.
"""

import os
import sys

import numpy
import tifffile
from PIL import Image

WIDTH, HEIGHT = 13, 7
HERE = os.path.dirname(os.path.abspath(__file__))


def pattern8(depth, height=HEIGHT, width=WIDTH):
    k, j, i = numpy.meshgrid(numpy.arange(depth), numpy.arange(height),
                             numpy.arange(width), indexing="ij")
    return ((7 * i + 11 * j + 37 * k + 3) % 256).astype(numpy.uint8)


def pattern16(depth, height=HEIGHT, width=WIDTH):
    k, j, i = numpy.meshgrid(numpy.arange(depth), numpy.arange(height),
                             numpy.arange(width), indexing="ij")
    v = (263 * i + 4099 * j + 16411 * k + 12345) % 65536
    return v.astype(numpy.uint16)


def path(*parts):
    p = os.path.join(HERE, *parts)
    os.makedirs(os.path.dirname(p), exist_ok=True)
    return p


def tiff(name, data, **kw):
    """Write data (pages, rows, columns[, samples]) with tifffile, no date."""
    kw.setdefault("photometric", "minisblack")
    tifffile.imwrite(path(name), data, datetime=False, software=None,
                     metadata=None, **kw)


def pil_pages(name, pages, mode, compression):
    """Write a multi-page TIFF through Pillow's libtiff writer."""
    images = [Image.fromarray(p, mode=mode) for p in pages]
    images[0].save(path(name), format="TIFF", compression=compression,
                   save_all=True, append_images=images[1:])


def png(name, plane):
    """Write one grey plane (8 or 16 bit) or an RGB image as PNG."""
    if plane.dtype == numpy.uint16:
        img = Image.fromarray(plane.astype(numpy.uint16), mode="I;16")
    else:
        img = Image.fromarray(plane)
    img.save(path(name), format="PNG", optimize=False)


def colour8():
    """An 8-bit RGB plane: R, G and B differ, so a grey conversion shows."""
    g = pattern8(1)[0].astype(numpy.uint16)
    rgb = numpy.stack([g, (3 * g + 50) % 256, (255 - g)], axis=-1)
    return rgb.astype(numpy.uint8)


def write_all():
    # Multi-page stacks.
    tiff("stack8_le.tif", pattern8(3), byteorder="<", rowsperstrip=3)
    tiff("stack16_be.tif", pattern16(4), byteorder=">")
    tiff("stack16_deflate.tif", pattern16(4), byteorder="<",
         compression="zlib", predictor=True, rowsperstrip=2)
    tiff("stack8_deflate_be.tif", pattern8(3), byteorder=">",
         compression="zlib", rowsperstrip=4)
    pil_pages("stack8_packbits.tif", pattern8(3), "L", "packbits")
    pil_pages("stack8_lzw.tif", pattern8(3), "L", "tiff_lzw")
    # A tiled stack whose tiles overhang the right and bottom edges.
    tiff("stack16_tiled.tif", pattern16(2, height=21, width=37),
         byteorder="<", tile=(16, 16))
    # Refused: BigTIFF.
    tiff("bigtiff.tif", pattern8(1), bigtiff=True)
    # White-is-zero grey: stored 255 - pattern, read back as pattern.
    tiff("miniswhite8.tif", 255 - pattern8(1), photometric="miniswhite")
    # Colour planes, read as grey.
    tiff("rgb8.tif", colour8(), photometric="rgb")
    png("rgb8.png", colour8())
    # Single planes.
    png("plane8.png", pattern8(1)[0])
    png("plane16.png", pattern16(1)[0])
    tiff("plane16.tif", pattern16(1)[0])
    # A folder stack in natural name order z1, z2, z10 (lexical order would
    # put z10 second), with files that are not images and must be skipped.
    stack = pattern16(3)
    png(os.path.join("planes", "z1.png"), stack[0])
    tiff(os.path.join("planes", "z2.tif"), stack[1])
    png(os.path.join("planes", "z10.png"), stack[2])
    with open(path("planes", "notes.txt"), "w") as f:
        f.write("not an image: the folder reader skips this file\n")
    with open(path("planes", "._z1.png"), "wb") as f:
        f.write(b"hidden resource fork, skipped because its name starts with a dot\n")
    # Folders that must be refused, each naming its odd file.
    png(os.path.join("mixed_size", "a1.png"), pattern8(1)[0])
    png(os.path.join("mixed_size", "a2.png"), pattern8(1, width=WIDTH - 1)[0])
    png(os.path.join("mixed_bits", "b1.png"), pattern8(1)[0])
    png(os.path.join("mixed_bits", "b2.png"), pattern16(1)[0])
    # Geometry recorded by another writer: ImageJ metadata through
    # tifffile's ImageJ mode, and centimetre resolution tags alone.
    tifffile.imwrite(path("imagej16.tif"), pattern16(3), imagej=True,
                     resolution=(1 / 0.25, 1 / 0.5),
                     metadata={"axes": "ZYX", "spacing": 2.0, "unit": "um",
                               "xorigin": 4, "zorigin": -3},
                     datetime=False, software=None)
    tiff("res_cm8.tif", pattern8(2), resolution=(40000, 40000),
         resolutionunit="CENTIMETER")


def fail(name, why):
    print(f"{name}: {why}", file=sys.stderr)
    sys.exit(1)


def check_geometry(name, want):
    """Check the voxel size and origin name records, as ImageJ reads them."""
    vx, vy, vz, ox, oy, oz = want
    with tifffile.TiffFile(name) as tif:
        page = tif.pages[0]
        tags = page.tags
        meta = tif.imagej_metadata
        if meta is None:
            fail(name, "no ImageJ metadata in the ImageDescription")
        for tag in ("XResolution", "YResolution", "ResolutionUnit"):
            if tag not in tags:
                fail(name, f"no {tag} tag")
        unit = int(tags["ResolutionUnit"].value)
        if unit != 1:
            fail(name, f"ResolutionUnit {unit}, want 1 (none; the unit is in the ImageJ metadata)")
        if meta.get("unit") not in ("micron", "um", "\\u00B5m"):
            fail(name, f"ImageJ unit {meta.get('unit')!r}, want micron")
        xn, xd = tags["XResolution"].value
        yn, yd = tags["YResolution"].value
        got = {
            "x voxel": xd / xn, "y voxel": yd / yn,
            "z voxel": float(meta.get("spacing", float("nan"))),
            "x origin": -float(meta.get("xorigin", 0)) * xd / xn,
            "y origin": -float(meta.get("yorigin", 0)) * yd / yn,
            "z origin": -float(meta.get("zorigin", 0)) * float(meta.get("spacing", 1)),
        }
        wanted = {"x voxel": vx, "y voxel": vy, "z voxel": vz,
                  "x origin": ox, "y origin": oy, "z origin": oz}
        for key, w in wanted.items():
            if not abs(got[key] - w) <= 1e-9 * max(1.0, abs(w)):
                fail(name, f"{key} {got[key]!r} um, want {w!r} um")
        if len(tif.pages) > 1 and int(meta.get("images", 0)) != len(tif.pages):
            fail(name, f"ImageJ images={meta.get('images')} for {len(tif.pages)} pages")
    print(f"{name}: geometry ok, voxel {vx} x {vy} x {vz} um, origin ({ox}, {oy}, {oz}) um")


def verify(name):
    if name.lower().endswith(".png"):
        with Image.open(name) as img:
            if img.mode not in ("L", "I;16", "I;16B", "I"):
                fail(name, f"PNG mode {img.mode}, want grey")
            data = numpy.array(img)
        if img.mode != "L":
            data = data.astype(numpy.uint16)
        data = data[numpy.newaxis]
    else:
        with tifffile.TiffFile(name) as tif:
            if tif.is_bigtiff:
                fail(name, "BigTIFF, want classic TIFF")
            for n, page in enumerate(tif.pages):
                if page.compression != 1:
                    fail(name, f"page {n}: compression {page.compression}, want 1 (none)")
                if page.photometric != 1:
                    fail(name, f"page {n}: photometric {page.photometric}, want 1 (black is zero)")
                if page.samplesperpixel != 1:
                    fail(name, f"page {n}: {page.samplesperpixel} samples per pixel, want 1")
            data = tif.asarray()
            pages = len(tif.pages)
        if data.ndim == 2:
            data = data[numpy.newaxis]
        if data.ndim != 3 or data.shape[0] != pages:
            fail(name, f"shape {data.shape} for {pages} pages")
    depth, height, width = data.shape
    if data.dtype == numpy.uint8:
        want = pattern8(depth, height, width)
    elif data.dtype == numpy.uint16:
        want = pattern16(depth, height, width)
    else:
        fail(name, f"sample type {data.dtype}, want uint8 or uint16")
    bad = numpy.argwhere(data != want)
    if len(bad):
        k, j, i = bad[0]
        fail(name, f"{len(bad)} voxels differ from the pattern, first at "
                   f"(i={i}, j={j}, k={k}): {data[k, j, i]} != {want[k, j, i]}")
    print(f"{name}: ok, {depth} page(s) of {width}x{height}, {data.dtype}")


def main(argv):
    if len(argv) >= 1 and argv[0] == "--verify":
        if len(argv) < 2:
            fail("make_images.py", "--verify needs at least one file")
        args = argv[1:]
        geometry, pattern = None, True
        while args:
            a = args.pop(0)
            if a == "--geometry":
                if not args:
                    fail("make_images.py", "--geometry needs VX,VY,VZ,OX,OY,OZ")
                try:
                    geometry = [float(v) for v in args.pop(0).split(",")]
                except ValueError:
                    geometry = []
                if len(geometry) != 6:
                    fail("make_images.py", "--geometry needs six numbers VX,VY,VZ,OX,OY,OZ")
                continue
            if a == "--geometry-only":
                pattern = False
                continue
            if geometry is not None:
                check_geometry(a, geometry)
            if pattern:
                verify(a)
            geometry, pattern = None, True
        return
    if argv:
        fail("make_images.py", f"unknown arguments {argv}; use no arguments or --verify FILE...")
    write_all()


if __name__ == "__main__":
    main(sys.argv[1:])

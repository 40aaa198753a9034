#!/usr/bin/python3
"""Write the inputs of docs/benchmarks.md, "Thousands of pairs", into the
current folder: landmark tables lm300.csv ... lm2000.csv (n pairs on a
jittered grid through a smooth warp, 0.3 um of picking noise, a quarter of
them somata: the formula of landmarkCSV in cmd/ferry/main_test.go), the same
with 5 pairs moved by 25 um (lm*_bad.csv), and cells tables of 100,000 and
1,000,000 cells (cellsCSV of the same file). Invented data, for timing only.

    /usr/bin/python3 testdata/bench/make_inputs.py
"""
import math


def landmarks(n, bad=0):
    out = ["id,kind,source_x,source_y,source_z,target_x,target_y,target_z,note"]
    side = int(math.ceil(n ** (1 / 3) - 1e-9))
    for i in range(n):
        gx, gy, gz = i % side, (i // side) % side, i // (side * side)
        step = 300 / side
        x = step * (gx + 0.5 + 0.3 * math.sin(7 * i + 1))
        y = step * (gy + 0.5 + 0.3 * math.sin(11 * i + 2))
        z = step * (gz + 0.5 + 0.3 * math.sin(13 * i + 3))
        tx = 1.02 * x + 0.05 * y + 12 + 4 * math.sin(y / 90) + 0.3 * math.sin(17 * i)
        ty = -0.04 * x + 0.98 * y + 0.02 * z - 7 + 0.3 * math.sin(19 * i)
        tz = 0.9 * z + 0.01 * x + 3 + 2 * math.cos(x / 120) + 0.3 * math.sin(23 * i)
        if bad and i % (n // bad) == n // (2 * bad):
            tx += 25
        kind = "soma" if i % 4 == 3 else "vessel"
        out.append("L%02d,%s,%.4f,%.4f,%.4f,%.4f,%.4f,%.4f,pick %d" % (i + 1, kind, x, y, z, tx, ty, tz, i + 1))
    return "\n".join(out) + "\n"


def frac(x):
    return x - math.floor(x)


def cells(n):
    out = ["id,x,y,z,osi"]
    for i in range(n):
        f = float(i)
        out.append("c%d,%.3f,%.3f,%.3f,%.2f" % (i + 1, 40 + 220 * frac(f * 0.618034), 40 + 220 * frac(f * 0.414214),
                                                40 + 220 * frac(f * 0.732051), frac(f * 0.1)))
    return "\n".join(out) + "\n"


def main():
    for n in (300, 400, 1000, 2000):
        with open("lm%d.csv" % n, "w") as f:
            f.write(landmarks(n))
        with open("lm%d_bad.csv" % n, "w") as f:
            f.write(landmarks(n, 5))
    with open("cells100k.csv", "w") as f:
        f.write(cells(100000))
    with open("cells1m.csv", "w") as f:
        f.write(cells(1000000))


if __name__ == "__main__":
    main()

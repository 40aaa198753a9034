// Apply ferry's exported OME-Zarr transform with an independent reader.
//
//   NODE_PATH=… node testdata/export/apply_zarr.mjs STORE POINTS.json
//
// Reads the store with the npm package zarrita (Zarr v3; its file-system
// store from @zarrita/storage), follows the OME-NGFF 0.6 metadata of the
// root group — a scene whose one coordinate transformation is a `sequence`
// of `displacements` then `affine` — reads the displacement array named
// there with its scale and translation into the input coordinate system,
// and maps each input point (source µm, x y z order, as the points file
// holds them) by  x' = A·(x + d(x)) + t  with d interpolated linearly.
// Prints one JSON object: {"zarrita": version, "shape": [...],
// "points": [[x', y', z'], ...]}. Only the metadata and the array are used:
// nothing of ferry's own code.
import * as zarr from "zarrita";
import FileSystemStore from "@zarrita/storage/fs";
import { readFileSync } from "node:fs";

const [storePath, pointsPath] = process.argv.slice(2);
const store = new FileSystemStore(storePath);
const root = await zarr.open.v3(zarr.root(store), { kind: "group" });
const seq = root.attrs.ome.scene.coordinateTransformations[0];
if (seq.type !== "sequence") throw new Error("want a sequence, got " + seq.type);
const [disp, aff] = seq.transformations;
if (disp.type !== "displacements" || aff.type !== "affine") throw new Error("want displacements then affine");

const fieldGroup = await zarr.open.v3(root.resolve(disp.path), { kind: "group" });
const ms = fieldGroup.attrs.ome.multiscales[0];
const ds = ms.datasets[0];
const [scaleT, transT] = ds.coordinateTransformations[0].transformations;
const arr = await zarr.open.v3(root.resolve(disp.path).resolve(ds.path), { kind: "array" });
const chunk = await zarr.get(arr); // the whole array: { data, shape, stride }
const shape = chunk.shape; // [components, (z,) y, x]
const dim = shape.length - 1;
const scale = scaleT.scale.slice(1), origin = transT.translation.slice(1);

// value of component c at grid index idx (NGFF axis order)
function at(c, idx) {
  let off = c * chunk.stride[0];
  for (let k = 0; k < dim; k++) off += idx[k] * chunk.stride[k + 1];
  return chunk.data[off];
}

function displacement(p) { // p in NGFF axis order
  const base = [], frac = [];
  for (let k = 0; k < dim; k++) {
    const u = (p[k] - origin[k]) / scale[k];
    let b = Math.floor(u);
    b = Math.min(Math.max(b, 0), shape[k + 1] - 2);
    base.push(b); frac.push(u - b);
  }
  const d = new Array(dim).fill(0);
  for (let corner = 0; corner < (1 << dim); corner++) {
    let w = 1; const idx = [];
    for (let k = 0; k < dim; k++) {
      const bit = (corner >> k) & 1;
      idx.push(base[k] + bit);
      w *= bit ? frac[k] : 1 - frac[k];
    }
    for (let c = 0; c < dim; c++) d[c] += w * at(c, idx);
  }
  return d;
}

const A = aff.affine; // dim rows of dim+1, NGFF axis order
const points = JSON.parse(readFileSync(pointsPath, "utf8"));
const out = points.map((xyz) => {
  const p = xyz.slice(0, dim).reverse(); // x y z -> z y x
  const d = displacement(p);
  const q = p.map((v, k) => v + d[k]);
  const r = A.map((row) => row.slice(0, dim).reduce((s, a, j) => s + a * q[j], row[dim]));
  return r.reverse(); // z y x -> x y z
});
let version = "unknown";
try {
  version = JSON.parse(readFileSync(new URL("./node_modules/zarrita/package.json", import.meta.url), "utf8")).version;
} catch { }
console.log(JSON.stringify({ zarrita: version, shape, points: out }));

// The compact model file of the local method: the JSON record with its arrays in a binary sidecar
// (src/model/binary.ts; DEVELOPERS.md "Model file"). Checked against sources outside rbfield: the
// published check value of CRC-32/ISO-HDLC ("123456789" → cbf43926), Python's zlib.crc32 and numpy
// reading the sidecar by the layout the JSON states (little-endian Float64/Int32 at the recorded
// offsets; Debian python3-numpy), the points file's own numbers, and the command line's exit codes and
// one-line messages (README "When something is wrong").
import { spawnSync } from "node:child_process";
import * as fs from "node:fs";
import * as os from "node:os";
import * as path from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { main } from "../src/cli.ts";
import { gridModel } from "../src/evaluate/grid.ts";
import { makeErrorEstimator } from "../src/evaluate/stderr.ts";
import { fitSurface } from "../src/fit/surface.ts";
import { readModel } from "../src/job.ts";
import { crc32Hex, sidecarPath } from "../src/model/binary.ts";
import { encodeModel, modelFromJson, modelToJson, type SurfaceModel } from "../src/model/model.ts";
import { RUN_OUTPUTS } from "../src/write/outputs.ts";
import { encodeGeoTiff } from "../src/write/geotiff.ts";
import { errorOf, franke, makePoints, mulberry32 } from "./helpers.ts";
import { gaussian } from "../src/random.ts";

let tmp = "";
let pointsFile = "";
beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "rbfield-binary-"));
  // 2,600 noisy readings of Franke's function on a 500 m site: the local method by default (above 2,000).
  const g = gaussian(mulberry32(41));
  const pts = makePoints(2600, 40, (x, y) => 100 + 10 * franke(x / 500, y / 500) + 0.05 * g(), 0, 0, 500);
  const rows = ["id,x,y,z,code"];
  for (let i = 0; i < pts.x.length; i++) rows.push(`P${i + 1},${pts.x[i].toFixed(3)},${pts.y[i].toFixed(3)},${pts.z[i].toFixed(4)},GS`);
  pointsFile = path.join(tmp, "site.csv");
  fs.writeFileSync(pointsFile, rows.join("\n") + "\n");
});
afterAll(() => {
  if (tmp) fs.rmSync(tmp, { recursive: true, force: true });
});

async function cli(args: string[]) {
  let out = "", err = "";
  const code = await main(args, { out: (s) => (out += s), err: (s) => (err += s + "\n") });
  return { code, out, err };
}

const python = spawnSync("/usr/bin/python3", ["-c", "import numpy"]).status === 0;

describe("CRC-32 of the sidecar", () => {
  it("is CRC-32/ISO-HDLC: the published check value of '123456789' is cbf43926", () => {
    expect(crc32Hex(new TextEncoder().encode("123456789"))).toBe("cbf43926");
    expect(crc32Hex(new Uint8Array(0))).toBe("00000000");
  });
});

describe("a local model is written as JSON with a binary sidecar", () => {
  let model = "";
  beforeAll(async () => {
    model = path.join(tmp, "site.rbfield.json");
    const r = await cli(["fit", pointsFile, "--out", model, "--crs", "local:m", "--quiet", "--json"]);
    expect(r.code, r.err).toBe(0);
    expect(JSON.parse(r.out).modelData).toBe(sidecarPath(model));
  });

  it("names the sidecar beside the model file: X.rbfield.json → X.rbfield.bin; other names get .bin added", () => {
    expect(sidecarPath("a/site.rbfield.json")).toBe("a/site.rbfield.bin");
    expect(sidecarPath("site.json")).toBe("site.json.bin");
    expect(fs.existsSync(path.join(tmp, "site.rbfield.bin"))).toBe(true);
  });

  it.skipIf(!python)("holds the arrays where the JSON says: numpy reads them, zlib.crc32 agrees, x and y are the file's coordinates", () => {
    const script = `
import json, sys, zlib, numpy as np
meta = json.load(open(sys.argv[1]))
b = meta["binary"]
data = open(sys.argv[2], "rb").read()
out = {"version": meta["version"], "bytes": len(data), "crc": "%08x" % (zlib.crc32(data) & 0xffffffff), "magic": data[:8].decode("ascii")}
def arr(key):
    a = b["arrays"][key]
    dt = "<f8" if a["type"] == "float64" else "<i4"
    return np.frombuffer(data, dtype=dt, count=a["length"], offset=a["offset"])
out["x"] = arr("points.x").tolist()
out["y"] = arr("points.y").tolist()
out["line"] = arr("points.line").tolist()
out["start"] = arr("local.start").tolist()
out["index_max"] = int(arr("local.index").max())
out["patches"] = b["arrays"]["local.radius"]["length"]
print(json.dumps(out))
`;
    const r = spawnSync("/usr/bin/python3", ["-c", script, model, sidecarPath(model)], { encoding: "utf8" });
    expect(r.status, r.stderr).toBe(0);
    const got = JSON.parse(r.stdout);
    const meta = JSON.parse(fs.readFileSync(model, "utf8"));
    expect(got.version).toBe(3);
    expect(got.magic).toBe("RBFIELDB");
    expect(got.bytes).toBe(meta.binary.bytes);
    expect(got.crc).toBe(meta.binary.crc32);
    // The coordinates as the points file wrote them (3 decimals), in file order; lines 2, 3, …
    const rows = fs.readFileSync(pointsFile, "utf8").trim().split("\n").slice(1).map((l) => l.split(","));
    expect(got.x.length).toBe(rows.length);
    for (const i of [0, 1, 777, rows.length - 1]) {
      expect(got.x[i]).toBe(Number(rows[i][1]));
      expect(got.y[i]).toBe(Number(rows[i][2]));
      expect(got.line[i]).toBe(i + 2);
    }
    expect(got.start.length).toBe(got.patches + 1);
    expect(got.index_max).toBe(rows.length - 1);
    // The JSON keeps what is not an array of numbers: the texts (point ids, codes) among them.
    expect(meta.points.text.find((t: { role: string }) => t.role === "id").values[0]).toBe("P1");
    expect(meta.points.x).toBe("binary");
  });

  it("reads back to the same model: the same record, grid bytes and standard errors", () => {
    const back = readModel(model);
    expect(back.method).toBe("local");
    expect(back.version).toBe(2);
    // Fitted again in memory, the record is the one written (the JSON-only form compares every number).
    const memory = JSON.parse(modelToJson(back));
    expect(memory.points.x.length).toBe(2600);
    const g1 = encodeGeoTiff(gridModel(back, { cell: 10 }));
    const g2 = encodeGeoTiff(gridModel(modelFromJson(modelToJson(back), "single.rbfield.json"), { cell: 10 }));
    expect(Buffer.from(g1).equals(Buffer.from(g2))).toBe(true);
    const s1 = makeErrorEstimator(back), s2 = makeErrorEstimator(modelFromJson(modelToJson(back), "single.rbfield.json"));
    for (const [x, y] of [[120, 340], [250.5, 250.5]]) expect(s1.at(x, y)).toBe(s2.at(x, y));
  });

  it("keeps single-file JSON models readable (the version 2 form of a local model, and global models)", () => {
    const pts = makePoints(300, 3, (x, y) => franke(x, y));
    for (const method of ["local", "global"] as const) {
      const m = fitSurface(pts, { method, kernel: "thin-plate", trend: "linear" });
      const text = modelToJson(m);
      expect(JSON.parse(text).version).toBe(2);
      const back = modelFromJson(text, "m.rbfield.json");
      expect(modelToJson(back)).toBe(text);
      // encodeModel writes a sidecar for local models only.
      expect(encodeModel(m, "m.rbfield.bin").binary === null).toBe(method === "global");
    }
  });

  it("in memory, the encoded pair reads back to the same JSON (every array, nulls of undefined residuals included)", () => {
    const pts = makePoints(400, 5, (x, y) => franke(x, y));
    const m = fitSurface(pts, { method: "local", kernel: "thin-plate", trend: "linear", patchPoints: 40 }) as SurfaceModel;
    (m.loo as (number | null)[])[7] = null;
    (m.looStandardised as (number | null)[])[8] = null;
    const { json, binary } = encodeModel(m, "m.rbfield.bin");
    const back = modelFromJson(json, "m.rbfield.json", { file: "m.rbfield.bin", read: () => binary! });
    expect(modelToJson(back)).toBe(modelToJson(m));
  });
});

describe("a damaged or missing sidecar is refused with one line naming it, and nothing is written", () => {
  let model = "", side = "", good: Uint8Array;
  beforeAll(async () => {
    model = path.join(tmp, "damage.rbfield.json");
    side = sidecarPath(model);
    expect((await cli(["fit", pointsFile, "--out", model, "--quiet"])).code).toBe(0);
    good = fs.readFileSync(side);
  });

  const cases: [string, (b: Uint8Array) => Uint8Array | null, number, RegExp][] = [
    ["cut short", (b) => b.subarray(0, b.length - 100), 3, /binary part is damaged.*bytes, the model file says/],
    ["one byte changed", (b) => {
      const c = Uint8Array.from(b);
      c[c.length >> 1] ^= 0x40;
      return c;
    }, 3, /binary part is damaged.*CRC-32 [0-9a-f]{8}, the model file says [0-9a-f]{8}/],
    ["missing", () => null, 4, /cannot read the model's binary part/],
  ];
  for (const [name, damage, code, words] of cases) {
    it(name, async () => {
      const d = damage(good);
      if (d) fs.writeFileSync(side, d);
      else fs.rmSync(side);
      try {
        const out = path.join(tmp, `damaged-${code}.tif`);
        const r = await cli(["grid", model, "--out", out, "--quiet"]);
        expect(r.code).toBe(code);
        expect(r.err.trim().split("\n")).toHaveLength(1);
        expect(r.err).toContain(side);
        expect(r.err).toMatch(words);
        expect(fs.existsSync(out)).toBe(false);
      } finally {
        fs.writeFileSync(side, good);
      }
    });
  }

  it("a version 3 file whose arrays lie outside its sidecar, or without its binary member", () => {
    const meta = JSON.parse(fs.readFileSync(model, "utf8"));
    meta.binary.arrays["points.x"].offset = meta.binary.bytes;
    let e = errorOf(() => modelFromJson(JSON.stringify(meta), model, { file: side, read: () => good }));
    expect(e.message).toMatch(/array points.x lies outside the file/);
    delete meta.binary;
    e = errorOf(() => modelFromJson(JSON.stringify(meta), model, { file: side, read: () => good }));
    expect(e.message).toContain(side);
    expect(e.message).toMatch(/does not describe it/);
  });
});

describe("the sidecar is an output like the others", () => {
  it("fit refuses to write it over an input; grid refuses to write over a model's sidecar", async () => {
    const input = path.join(tmp, "in.rbfield.bin");
    fs.copyFileSync(pointsFile, input);
    const before = fs.readFileSync(input);
    let r = await cli(["fit", input, "--out", path.join(tmp, "in.rbfield.json"), "--quiet"]);
    expect(r.code).toBe(4);
    expect(r.err).toMatch(/output path is also an input/);
    expect(fs.readFileSync(input).equals(before)).toBe(true);
    const model = path.join(tmp, "site.rbfield.json");
    if (!fs.existsSync(model)) expect((await cli(["fit", pointsFile, "--out", model, "--quiet"])).code).toBe(0);
    const sideBefore = fs.readFileSync(sidecarPath(model));
    r = await cli(["grid", model, "--out", sidecarPath(model), "--quiet"]);
    expect(r.code).toBe(4);
    expect(fs.readFileSync(sidecarPath(model)).equals(sideBefore)).toBe(true);
  });

  it("run writes model.rbfield.bin for a local model, lists it, and a later global run into the folder removes it", async () => {
    // 400 of the readings keep the two runs short: the local method by --method, then the global one.
    const small = path.join(tmp, "small.csv");
    fs.writeFileSync(small, fs.readFileSync(pointsFile, "utf8").split("\n").slice(0, 401).join("\n") + "\n");
    const dir = path.join(tmp, "job");
    let r = await cli(["run", small, "--out", dir, "--quiet", "--json", "--cell", "20", "--method", "local"]);
    expect(r.code, r.err).toBe(0);
    expect(fs.readdirSync(dir).sort()).toEqual(RUN_OUTPUTS.map((o) => o.file).sort());
    expect(JSON.parse(r.out).files.modelData).toBe(path.join(dir, "model.rbfield.bin"));
    expect(fs.readFileSync(path.join(dir, "run-summary.txt"), "utf8")).toMatch(/model data +.*model\.rbfield\.bin/);
    expect(readModel(path.join(dir, "model.rbfield.json")).method).toBe("local");
    r = await cli(["run", small, "--out", dir, "--quiet", "--method", "global", "--kernel", "thin-plate", "--cell", "20"]);
    expect(r.code, r.err).toBe(0);
    expect(fs.readdirSync(dir).sort()).toEqual(RUN_OUTPUTS.filter((o) => !o.optional).map((o) => o.file).sort());
  }, 120_000);
});

describe("fit over an earlier local model", () => {
  it("a global model written where a local one was removes the local model's sidecar, and leaves another file of that name alone", async () => {
    const dir = fs.mkdtempSync(path.join(os.tmpdir(), "rbfield-stale-"));
    try {
      const small = path.join(dir, "small.csv");
      fs.writeFileSync(small, fs.readFileSync(pointsFile, "utf8").split("\n").slice(0, 301).join("\n") + "\n");
      const model = path.join(dir, "m.rbfield.json");
      expect((await cli(["fit", small, "--out", model, "--method", "local", "--quiet"])).code).toBe(0);
      expect(fs.existsSync(sidecarPath(model))).toBe(true);
      expect((await cli(["fit", small, "--out", model, "--method", "global", "--kernel", "thin-plate", "--quiet"])).code).toBe(0);
      expect(fs.existsSync(sidecarPath(model))).toBe(false);
      // A file of the sidecar's name that is not one (no RBFIELDB header) is not touched.
      fs.writeFileSync(sidecarPath(model), "not a sidecar");
      expect((await cli(["fit", small, "--out", model, "--method", "global", "--kernel", "thin-plate", "--quiet"])).code).toBe(0);
      expect(fs.readFileSync(sidecarPath(model), "utf8")).toBe("not a sidecar");
    } finally {
      fs.rmSync(dir, { recursive: true, force: true });
    }
  });
});

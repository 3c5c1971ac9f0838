// Safe output (common practice for atomic replacement: write a temporary file beside the target,
// then rename it): nothing changes until every file of a run is written, a failure leaves the old
// outputs and no temporary file, and text written in pieces equals the text written whole.
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import * as fs from "node:fs";
import * as os from "node:os";
import * as path from "node:path";
import { fileBatch, writeFileAtomic } from "../src/write/atomic.ts";
import { RbfieldError } from "../src/errors.ts";

let dir = "";
beforeAll(() => {
  dir = fs.mkdtempSync(path.join(os.tmpdir(), "rbfield-atomic-"));
});
afterAll(() => {
  if (dir) fs.rmSync(dir, { recursive: true, force: true });
});

const listing = (d: string) => fs.readdirSync(d).sort();

describe("a batch of output files", () => {
  it("changes no target before commit, then all of them; abort leaves the old files and no temporary file", () => {
    const d = fs.mkdtempSync(path.join(dir, "batch-"));
    const a = path.join(d, "a.csv"), b = path.join(d, "b.txt");
    fs.writeFileSync(a, "old a");
    const batch = fileBatch();
    batch.add(a, "new a");
    batch.add(b, new TextEncoder().encode("new b"));
    expect(fs.readFileSync(a, "utf8")).toBe("old a");
    expect(fs.existsSync(b)).toBe(false);
    batch.commit();
    expect(fs.readFileSync(a, "utf8")).toBe("new a");
    expect(fs.readFileSync(b, "utf8")).toBe("new b");
    expect(listing(d)).toEqual(["a.csv", "b.txt"]);

    const again = fileBatch();
    again.add(a, "newer a");
    again.abort();
    expect(fs.readFileSync(a, "utf8")).toBe("new a");
    expect(listing(d)).toEqual(["a.csv", "b.txt"]);
  });

  it("a file that cannot be written: one error naming it, earlier files of the batch removed, old outputs kept", () => {
    const d = fs.mkdtempSync(path.join(dir, "fail-"));
    const a = path.join(d, "a.csv");
    fs.writeFileSync(a, "old a");
    const batch = fileBatch();
    batch.add(a, "new a");
    const missing = path.join(d, "no-such-folder", "b.csv");
    let error: unknown;
    try {
      batch.add(missing, "b");
    } catch (e) {
      error = e;
    }
    expect(error).toBeInstanceOf(RbfieldError);
    expect((error as RbfieldError).message).toContain("b.csv");
    expect(fs.readFileSync(a, "utf8")).toBe("old a");
    expect(listing(d)).toEqual(["a.csv"]);
  });

  it("text in pieces, across the 1 MiB write blocks, equals the same text written whole (UTF-8)", () => {
    const pieces = Array.from({ length: 60_000 }, (_, i) => `${i},µg/l,${(i * 0.1).toFixed(3)}\r\n`);
    const whole = path.join(dir, "whole.csv"), inPieces = path.join(dir, "pieces.csv");
    writeFileAtomic(whole, pieces.join(""));
    writeFileAtomic(inPieces, { pieces: (function* () { yield* pieces; })() });
    expect(fs.statSync(whole).size).toBeGreaterThan(1 << 20);
    expect(fs.readFileSync(inPieces).equals(fs.readFileSync(whole))).toBe(true);
  });
});

describe("a run's big tables written by a worker thread", () => {
  it("residuals.csv and (from a table made by hand, without written cells) estimates.csv from tables_worker.ts equal the same tables written in this thread", async () => {
    const { fitSurface } = await import("../src/fit/surface.ts");
    const { makePoints, franke } = await import("./helpers.ts");
    const { runWorker } = await import("../src/workers.ts");
    const { tableJob, tablePieces } = await import("../src/write/table_jobs.ts");
    const pts = makePoints(60, 3, (x, y) => 100 + franke(x, y));
    const model = fitSurface(pts, { kernel: "thin-plate", trend: "linear" });
    const table = {
      columns: ["x", "y", "note"],
      rows: Array.from(pts.x, (x, i) => [String(x), String(pts.y[i]), i % 7 ? "" : 'kerb, "top"']),
      lines: Array.from(pts.x, (_, i) => i + 2),
      xColumn: 0,
      yColumn: 1,
      zColumn: -1,
      hasHeader: true,
    };
    const columns = [{ name: "estimate", values: Float64Array.from(pts.z, (z) => z + 0.125) }, { name: "extrapolation", values: Array.from(pts.z, (_, i) => (i % 5 ? "" : "far from data")) }];
    const products = { model, estimates: { table: table as never, columns } };
    for (const key of ["residuals", "estimates"]) {
      const job = tableJob(key, products)!;
      const here = path.join(dir, `${key}-here.csv`), there = path.join(dir, `${key}-worker.csv`);
      writeFileAtomic(here, tablePieces(job));
      const reply = await runWorker<{ done?: boolean }>(new URL("../src/write/tables_worker.ts", import.meta.url), { ...job, file: there });
      expect(reply.done).toBe(true);
      expect(fs.readFileSync(there).equals(fs.readFileSync(here)), key).toBe(true);
      expect(fs.readFileSync(here, "utf8").split("\r\n").length).toBe(62);
    }
  });
});

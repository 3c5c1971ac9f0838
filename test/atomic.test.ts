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

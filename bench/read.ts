// Reading a big points file: wall time and memory of readPointTable (and of cleaning the table it
// returns) on an invented CSV of N data lines, each run in a fresh process so peaks do not mix.
//
//   npx -y deno@2 run -A bench/read.ts                 N = 10⁵ and 10⁶
//   npx -y deno@2 run -A bench/read.ts 250000          other sizes
//
// The file (point number, easting, northing, level with three decimals, a code from a short list;
// about 42 bytes a line, so 10⁶ lines ≈ 42 MB) comes from a seeded generator and is written to a
// temporary folder, removed at the end. Printed per size: the file size, the read and clean times,
// the process's peak resident set (VmHWM from /proc/self/status, Linux) when the read has finished
// and when the cleaning has, and its resident set after the read with the table still held
// (Deno.memoryUsage().rss); first the same for a process that only starts and imports the reader
// (the baseline the runtime itself takes).
import * as fs from "node:fs";
import * as os from "node:os";
import * as path from "node:path";
import { cleanPoints } from "../src/clean/clean.ts";
import { readPointTable } from "../src/read/points.ts";
import { mulberry32 } from "../src/random.ts";
import { peakRss } from "./harness.ts";

const MiB = 1024 * 1024;

/** Write n data lines of an invented survey (seeded) to `file`, a block at a time. */
function writeSurvey(file: string, n: number): void {
  const u = mulberry32(20261202);
  const codes = ["GS", "GS", "GS", "KB", "TP", "CL"];
  const fd = fs.openSync(file, "w");
  try {
    let block = "point,easting,northing,level,code\n";
    for (let i = 0; i < n; i++) {
      const x = 512000 + 1000 * u(), y = 5402000 + 1000 * u();
      const z = 100 + 3 * Math.sin(x / 150) + 2 * Math.cos(y / 200) + 0.05 * u();
      block += `${1000 + i},${x.toFixed(3)},${y.toFixed(3)},${z.toFixed(3)},${codes[Math.floor(u() * codes.length)]}\n`;
      if (block.length > 1 << 20) {
        fs.writeSync(fd, block);
        block = "";
      }
    }
    fs.writeSync(fd, block);
  } finally {
    fs.closeSync(fd);
  }
}

interface ChildResult {
  readSeconds: number;
  cleanSeconds: number;
  /** Peak resident set when the read has finished, and when the cleaning has. */
  peakReadMiB: number;
  peakMiB: number;
  rssAfterReadMiB: number;
  rows: number;
}

/** In the child: read (and clean) the file, or only start when `file` is empty. */
async function child(file: string): Promise<void> {
  if (file === "") {
    const peak = peakRss();
    console.log(JSON.stringify({ readSeconds: 0, cleanSeconds: 0, peakReadMiB: peak, peakMiB: peak, rssAfterReadMiB: Deno.memoryUsage().rss / MiB, rows: 0 }));
    return;
  }
  const t0 = performance.now();
  const table = await readPointTable(file);
  const t1 = performance.now();
  const rssAfterReadMiB = Deno.memoryUsage().rss / MiB;
  const peakReadMiB = peakRss();
  const clean = cleanPoints(table, { mergeConflicts: true });
  const t2 = performance.now();
  const result: ChildResult = {
    readSeconds: (t1 - t0) / 1000,
    cleanSeconds: (t2 - t1) / 1000,
    peakReadMiB,
    peakMiB: peakRss(),
    rssAfterReadMiB,
    rows: table.lines.length + 0 * clean.x.length,
  };
  console.log(JSON.stringify(result));
}

function runChild(file: string): ChildResult {
  const out = new Deno.Command(Deno.execPath(), {
    args: ["run", "-A", new URL(import.meta.url).pathname, "--child", file],
    stdout: "piped",
    stderr: "inherit",
  }).outputSync();
  if (!out.success) throw new Error(`child failed on ${file}`);
  return JSON.parse(new TextDecoder().decode(out.stdout).trim().split("\n").at(-1)!);
}

if (Deno.args[0] === "--child") {
  await child(Deno.args[1] ?? "");
} else {
  const sizes = Deno.args.length ? Deno.args.map(Number) : [1e5, 1e6];
  const dir = fs.mkdtempSync(path.join(os.tmpdir(), "rbfield-read-"));
  try {
    const base = runChild("");
    console.log(`baseline (start and import only): peak ${base.peakMiB.toFixed(0)} MiB, rss ${base.rssAfterReadMiB.toFixed(0)} MiB`);
    console.log("lines      file MiB  read s  clean s  peak after read MiB  rss after read MiB  peak after clean MiB");
    for (const n of sizes) {
      const file = path.join(dir, `survey-${n}.csv`);
      writeSurvey(file, n);
      const r = runChild(file);
      if (r.rows !== n) throw new Error(`read ${r.rows} rows of ${n}`);
      console.log(
        `${String(n).padEnd(9)}  ${(fs.statSync(file).size / MiB).toFixed(1).padStart(8)}  ${r.readSeconds.toFixed(2).padStart(6)}  ` +
          `${r.cleanSeconds.toFixed(2).padStart(7)}  ${r.peakReadMiB.toFixed(0).padStart(19)}  ${r.rssAfterReadMiB.toFixed(0).padStart(18)}  ` +
          `${r.peakMiB.toFixed(0).padStart(20)}`,
      );
      fs.rmSync(file);
    }
  } finally {
    fs.rmSync(dir, { recursive: true, force: true });
  }
}

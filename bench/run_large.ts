// The whole `run` on a big invented survey, as a user runs it: a CSV of N lines (Franke's 1982 test
// function on a 1 km site, values 100 + 10·F(x/1000, y/1000), Gaussian noise of sd 0.05, seeded),
// the command line in a child process, a 1000 × 1000 grid of 1 m cells. Printed: wall time, each
// stage's time (from the child's progress lines on stderr, timestamped here), the child's peak
// resident set (VmHWM, read from /proc/PID/status while it runs), the RMSE of surface.tif against the
// true function, and the issue's targets beside them (peak ≤ 2 GiB, RMSE ≤ 0.02, wall ≤ 60 s at 10⁶).
//
//   npx -y deno@2 run -A bench/run_large.ts                 N = 10⁶
//   npx -y deno@2 run -A bench/run_large.ts --points 100000
//   npx -y deno@2 run -A bench/run_large.ts --keep DIR      keep the CSV and outputs in DIR
//   npx -y deno@2 run -A bench/run_large.ts --patch-points N  the local method's points per patch
import * as fs from "node:fs";
import * as os from "node:os";
import * as path from "node:path";
import { parseArgs } from "node:util";
import { readGrid } from "../src/job/points.ts";
import { gaussian, mulberry32 } from "../src/random.ts";
import { franke } from "../test/helpers.ts";

const { values } = parseArgs({ args: Deno.args, options: { points: { type: "string" }, keep: { type: "string" }, cell: { type: "string" }, "patch-points": { type: "string" } } });
const N = Number(values.points ?? 1_000_000);
const CELL = Number(values.cell ?? 1);
const SITE = 1000;
const truth = (x: number, y: number) => 100 + 10 * franke(x / SITE, y / SITE);

const dir = values.keep ?? fs.mkdtempSync(path.join(os.tmpdir(), "rbfield-run-large-"));
fs.mkdirSync(dir, { recursive: true });
const csv = path.join(dir, `franke-${N}.csv`);
if (!fs.existsSync(csv)) {
  // Written in blocks: the generator never holds the whole text.
  const u = mulberry32(20261202), g = gaussian(mulberry32(20261203));
  const fd = fs.openSync(csv, "w");
  fs.writeSync(fd, "x,y,z\n");
  let block: string[] = [];
  for (let i = 0; i < N; i++) {
    const x = SITE * u(), y = SITE * u();
    block.push(`${x.toFixed(3)},${y.toFixed(3)},${(truth(x, y) + 0.05 * g()).toFixed(4)}`);
    if (block.length === 50_000) {
      fs.writeSync(fd, block.join("\n") + "\n");
      block = [];
    }
  }
  if (block.length) fs.writeSync(fd, block.join("\n") + "\n");
  fs.closeSync(fd);
}
const out = path.join(dir, "out");
const cli = path.join(import.meta.dirname!, "..", "src", "cli.ts");
const args = ["run", "-A", cli, "run", csv, "--out", out, "--cell", String(CELL), "--extent", `0,0,${SITE},${SITE}`, "--title", "Invented benchmark site", ...(values["patch-points"] ? ["--patch-points", values["patch-points"]] : [])];

const t0 = performance.now();
const child = new Deno.Command(Deno.execPath(), { args, stdout: "piped", stderr: "piped" }).spawn();
// Peak resident set of the child: VmHWM only grows, so the last reading before it exits is the peak.
// The largest resident set seen during each stage (VmRSS sampled every 100 ms) says where the peak is.
let peakKiB = 0;
const stages: { message: string; at: number; rssKiB: number }[] = [];
const poll = setInterval(() => {
  try {
    const status = fs.readFileSync(`/proc/${child.pid}/status`, "utf8");
    const m = /^VmHWM:\s+(\d+)\s+kB/m.exec(status), r = /^VmRSS:\s+(\d+)\s+kB/m.exec(status);
    if (m) peakKiB = Math.max(peakKiB, Number(m[1]));
    const last = stages[stages.length - 1];
    if (r && last) last.rssKiB = Math.max(last.rssKiB, Number(r[1]));
  } catch { /* exited */ }
}, 100);
const decoder = new TextDecoder();
let pending = "";
const readErr = (async () => {
  for await (const chunk of child.stderr) {
    pending += decoder.decode(chunk, { stream: true });
    let k: number;
    while ((k = pending.indexOf("\n")) >= 0) {
      const line = pending.slice(0, k);
      pending = pending.slice(k + 1);
      const m = /^rbfield: (.*)$/.exec(line);
      if (m && !/^warning:/.test(m[1])) stages.push({ message: m[1].replace(/\s+\d+%.*$/, ""), at: performance.now(), rssKiB: 0 });
      else if (line.trim()) console.error(line);
    }
  }
})();
const stdout = new Response(child.stdout).text();
const status = await child.status;
await readErr;
clearInterval(poll);
const wall = (performance.now() - t0) / 1000;
if (!status.success) {
  console.error(await stdout);
  throw new Error(`run failed with exit code ${status.code}`);
}

// Stage times: from each progress message to the next (the last to the end).
const rows: [string, string, string][] = [];
for (let i = 0; i < stages.length; i++) {
  const end = i + 1 < stages.length ? stages[i + 1].at : t0 + wall * 1000;
  const s = (end - stages[i].at) / 1000;
  if (s >= 0.05) rows.push([stages[i].message, s.toFixed(2), stages[i].rssKiB ? (stages[i].rssKiB / 1024).toFixed(0) : ""]);
}
const grid = await readGrid(path.join(out, "surface.tif"));
let ss = 0, count = 0;
for (let r = 0; r < grid.spec.rows; r++) {
  const y = grid.spec.ymax - (r + 0.5) * grid.spec.cell;
  for (let c = 0; c < grid.spec.cols; c++) {
    const v = grid.values[r * grid.spec.cols + c];
    if (Number.isNaN(v)) continue;
    ss += (v - truth(grid.spec.xmin + (c + 0.5) * grid.spec.cell, y)) ** 2;
    count++;
  }
}
const rmse = Math.sqrt(ss / count);
const peakMiB = peakKiB / 1024;
const width = Math.max(...rows.map((r) => r[0].length), 10);
console.log(`run on ${N.toLocaleString("en")} points, ${grid.spec.cols} × ${grid.spec.rows} grid (${os.cpus().length} cores, ${(os.totalmem() / 2 ** 30).toFixed(0)} GiB; ${new Date().toISOString()})`);
console.log(`  ${"stage (time to the next stage; largest resident set seen in it)".padEnd(width)}`);
for (const [m, s, rss] of rows) console.log(`  ${m.padEnd(width)}  ${s.padStart(7)} s ${rss.padStart(6)} MiB`);
console.log(`  ${"wall".padEnd(width)}  ${wall.toFixed(2).padStart(7)} s   target ≤ 60 s at 10⁶ (ratio ${(wall / 60).toFixed(2)})`);
console.log(`  ${"peak memory".padEnd(width)}  ${peakMiB.toFixed(0).padStart(7)} MiB target ≤ 2048 MiB (ratio ${(peakMiB / 2048).toFixed(2)})`);
console.log(`  ${"RMSE vs truth".padEnd(width)}  ${rmse.toFixed(4).padStart(7)}   target ≤ 0.02 (ratio ${(rmse / 0.02).toFixed(2)}; noise sd 0.05)`);
console.log(`  files: ${fs.readdirSync(out).map((f) => `${f} ${(fs.statSync(path.join(out, f)).size / 2 ** 20).toFixed(1)} MiB`).join(", ")}`);
if (!values.keep) fs.rmSync(dir, { recursive: true, force: true });

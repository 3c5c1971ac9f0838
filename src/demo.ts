// The demo: the whole job on the bundled, invented Kestrel Ridge sample, into out/demo/.
import { CAUTION } from "./caution.ts";
import { main } from "./cli.ts";

/** The demo's run as the CLI takes it, without the output folder (tests run the same job). */
export const DEMO_ARGS: readonly string[] = [
  "run",
  "samples/kestrel-ridge-levels.csv",
  "--crs",
  "EPSG:32632",
  "--locations",
  "samples/kestrel-ridge-footings.csv",
  "--interval",
  "0.5",
  "--title",
  "Kestrel Ridge Lot 7 — spot levels (invented demo data)",
];

if (import.meta.main) {
  const code = await main([...DEMO_ARGS, "--out", "out/demo", "--quiet"], { out: (s) => console.log(s.trimEnd()), err: (s) => console.error(s) });
  if (code !== 0) console.error(`demo failed (exit code ${code}); ${CAUTION}`);
  Deno.exit(code);
}

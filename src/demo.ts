// The demo: the whole job on the bundled, invented Kestrel Ridge sample, into out/demo/.
import { CAUTION } from "./caution.ts";
import { main } from "./cli.ts";

const code = await main(
  [
    "run",
    "samples/kestrel-ridge-levels.csv",
    "--crs",
    "EPSG:32632",
    "--locations",
    "samples/kestrel-ridge-footings.csv",
    "--out",
    "out/demo",
    "--interval",
    "0.5",
    "--title",
    "Kestrel Ridge Lot 7 — spot levels (invented demo data)",
    "--quiet",
  ],
  { out: (s) => console.log(s.trimEnd()), err: (s) => console.error(s) },
);
if (code !== 0) console.error(`demo failed (exit code ${code}); ${CAUTION}`);
Deno.exit(code);

// Generates the bundled demo data. EVERYTHING HERE IS INVENTED: the site "Kestrel Ridge Lot 7",
// the crew and every reading are made up by this script (fixed seed) for the demo only.
// Run: deno run --allow-write=samples samples/make-sample.ts
import { writeFileSync } from "node:fs";
import { gaussian, mulberry32 } from "../src/random.ts";

const rand = mulberry32(20261201);
const gauss = gaussian(rand);

// Invented terrain on a 400 m × 300 m lot: a ridge rising to the north-east, a drainage swale
// and a small knoll, levels in metres above an invented datum.
const X0 = 512300, Y0 = 5402100;
function ground(x: number, y: number): number {
  const u = (x - X0) / 400, v = (y - Y0) / 300;
  return 84 + 6 * u + 4 * v + 2.5 * Math.exp(-((u - 0.7) ** 2 + (v - 0.35) ** 2) / 0.04) -
    1.8 * Math.exp(-((u - 0.35 - 0.2 * v) ** 2) / 0.03) + 0.6 * Math.sin(3 * u) * Math.cos(2 * v);
}

const rows: string[] = [
  "# INVENTED DEMO DATA - Kestrel Ridge Lot 7 (fictional site), GNSS rover spot levels",
  "# crew: invented field crew 'B'; CRS EPSG:32632 (WGS 84 / UTM zone 32N); levels in metres",
  "point_id,easting,northing,level,code",
];
let id = 1000;
const shot = (x: number, y: number, code: string, level?: string) => {
  const z = level ?? (ground(x, y) + 0.03 * gauss()).toFixed(3);
  rows.push(`${id++},${x.toFixed(3)},${y.toFixed(3)},${z},${code}`);
};
// Scattered shots over the lot.
for (let i = 0; i < 420; i++) shot(X0 + 400 * rand(), Y0 + 300 * rand(), "NS");
// A denser string along the proposed access road.
for (let i = 0; i < 40; i++) shot(X0 + 20 + 9 * i + 2 * rand(), Y0 + 60 + 4 * i + 2 * rand(), "RD");
// Field realities the tool must handle and report:
rows.push(`${id++},${(X0 + 123.4).toFixed(3)},${(Y0 + 55.5).toFixed(3)},n/a,NS`); // no reading
const dx = X0 + 250.25, dy = Y0 + 150.75;
shot(dx, dy, "NS");
shot(dx, dy, "NS"); // the same shot taken twice
shot(X0 + 180.5, Y0 + 220.2, "NS", (ground(X0 + 180.5, Y0 + 220.2) + 1.6).toFixed(3)); // rod height slip
writeFileSync("samples/kestrel-ridge-levels.csv", rows.join("\n") + "\n");

// Invented proposed footing positions for the estimates demo.
const locs = [
  "footing,easting,northing,note",
  `F1,${X0 + 100},${Y0 + 100},"north-west pad, by the swale"`,
  `F2,${X0 + 200},${Y0 + 150},centre`,
  `F3,${X0 + 320},${Y0 + 200},"knoll, check ""high"" level"`,
  `F4,${X0 + 60},${Y0 + 250},near boundary`,
];
writeFileSync("samples/kestrel-ridge-footings.csv", locs.join("\n") + "\n");
console.log("wrote samples/kestrel-ridge-levels.csv and samples/kestrel-ridge-footings.csv (invented data)");

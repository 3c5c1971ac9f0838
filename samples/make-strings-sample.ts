// Writes samples/heron-lane-strings.csv: an INVENTED site survey with coded strings (see
// samples/heron_lane.ts; nothing in it is real). Run:
//   npx -y deno@2 run --allow-write=samples samples/make-strings-sample.ts
import { writeFileSync } from "node:fs";
import { heronSurvey } from "./heron_lane.ts";

const rows = [
  "# INVENTED DEMO DATA - Heron Lane (fictional site): rover levels and coded strings; local site grid, metres",
  "# codes: GS ground shot; BT/BB bank top/toe; FB back of footway; KT kerb top; CH channel; CL crown; DT/DI ditch top/invert",
  "point,easting,northing,level,code",
  ...heronSurvey().map((s) => `${s.id},${s.x.toFixed(3)},${s.y.toFixed(3)},${s.z.toFixed(3)},${s.code}`),
];
writeFileSync(new URL("./heron-lane-strings.csv", import.meta.url), rows.join("\n") + "\n");
console.log(`wrote samples/heron-lane-strings.csv (${rows.length - 3} shots)`);

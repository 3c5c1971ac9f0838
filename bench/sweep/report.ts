// Text and Markdown tables of the sweep statistics (bench/sweep/evaluate.ts computes them).
import { type CaseResult, groupBy, GROUPINGS, type Summary, summarise } from "./evaluate.ts";

const SHORT: Record<string, string> = {
  "thin-plate": "tp",
  gaussian: "gau",
  multiquadric: "mq",
  "inverse-multiquadric": "imq",
  linear: "lin",
  constant: "con",
  quadratic: "quad",
  none: "none",
};

function chosenText(s: Summary): string {
  return [...s.chosen.entries()]
    .sort((a, b) => b[1] - a[1] || (a[0] < b[0] ? -1 : 1))
    .map(([k, n]) => `${k.split("/").map((p) => SHORT[p] ?? p).join("/")} ${n}`)
    .join(", ");
}

const f2 = (v: number) => (Number.isNaN(v) ? "–" : v.toFixed(2));
const f3 = (v: number) => (Number.isNaN(v) ? "–" : v.toFixed(3));

const HEAD = ["group", "cases", "mgcv ok", "def/mgcv mean", "p90", "max", "tp/mgcv mean", "p90", "max", "cover def", "cover mgcv", "se bad", "default chose"];

function cells(label: string, s: Summary): string[] {
  return [
    label,
    String(s.cases),
    String(s.compared),
    f3(s.meanRatio),
    f2(s.p90Ratio),
    f2(s.maxRatio),
    f3(s.meanTp),
    f2(s.p90Tp),
    f2(s.maxTp),
    f3(s.coverDefault),
    f3(s.coverMgcv),
    String(s.seBad),
    chosenText(s),
  ];
}

function tableRows(rows: CaseResult[]): { section: string; lines: string[][] }[] {
  const out = GROUPINGS.map(([name, key]) => ({
    section: `by ${name}`,
    lines: groupBy(rows, key).map(([label, rs]) => cells(label, summarise(rs))),
  }));
  out.push({ section: "overall", lines: [cells("all", summarise(rows))] });
  return out;
}

/** Fixed-width table: one section per grouping, then the overall line. */
export function textTable(rows: CaseResult[]): string {
  const sections = tableRows(rows);
  const all = [HEAD, ...sections.flatMap((s) => s.lines)];
  const width = HEAD.map((_, j) => Math.max(...all.map((r) => r[j].length)));
  const fmt = (r: string[]) => r.map((c, j) => (j === 0 || j === r.length - 1 ? c.padEnd(width[j]) : c.padStart(width[j]))).join("  ").trimEnd();
  const lines = [fmt(HEAD)];
  for (const s of sections) lines.push(`-- ${s.section}`, ...s.lines.map(fmt));
  return lines.join("\n");
}

export function markdownTable(rows: CaseResult[]): string {
  const line = (r: string[]) => `| ${r.join(" | ")} |`;
  const lines = [line(HEAD), line(HEAD.map((_, j) => (j === 0 || j === HEAD.length - 1 ? "---" : "---:")))];
  for (const s of tableRows(rows)) {
    for (const r of s.lines) lines.push(line([s.section === "overall" ? "**all**" : `${s.section.slice(3)}: ${r[0]}`, ...r.slice(1)]));
  }
  return lines.join("\n");
}

/** The k cases with the largest default/mgcv RMSE ratio, with their parameters. */
export function worstCases(rows: CaseResult[], k = 10): string {
  const sorted = rows.filter((r) => !Number.isNaN(r.ratioDefault)).sort((a, b) => b.ratioDefault - a.ratioDefault).slice(0, k);
  const g = (v: number) => v.toPrecision(3);
  return sorted
    .map((r) => {
      const c = r.c;
      return `${c.id.padEnd(40)} design=${c.design} surface=${c.surface} noise=${c.noise}${c.log ? " (log)" : ""} N=${c.n} ${c.coords}: ` +
        `RMSE default ${g(r.rmseDefault)} (${r.kernel}/${r.trend}), ` +
        (Number.isNaN(r.rmseTp) ? "" : `thin-plate ${g(r.rmseTp)}, `) +
        `mgcv ${g(r.rmseMgcv)}; ratio ${r.ratioDefault.toFixed(2)}` + (Number.isNaN(r.ratioTp) ? "" : `, tp ratio ${f2(r.ratioTp)}`);
    })
    .join("\n");
}

/** Cases where rbfield or mgcv failed, or the standard errors were bad. */
export function problemCases(rows: CaseResult[]): string {
  return rows
    .filter((r) => r.rbError || r.mgcvStatus !== "ok" || r.seNegative || r.seNonFinite || r.seAllZero)
    .map((r) =>
      `${r.c.id}: ` + [
        r.rbError ? `rbfield error: ${r.rbError}` : "",
        r.mgcvStatus !== "ok" ? `mgcv ${r.mgcvStatus}: ${r.mgcvMessage}` : "",
        r.seNegative ? `${r.seNegative} negative se` : "",
        r.seNonFinite ? `${r.seNonFinite} non-finite se` : "",
        r.seAllZero ? "all se zero" : "",
      ].filter(Boolean).join("; ")
    )
    .join("\n");
}

// rbfield command-line tool: a thin layer over the library (src/mod.ts).
// Usage: deno task rbfield <verb> [options]; every verb has --help.
import { parseArgs } from "node:util";
import { ExitCode, RbfieldError } from "./errors.ts";
import { type ProgressReporter, progressReporter, type TerminalWriter } from "./cli_progress.ts";
import { contourVerb, fitVerb, gridVerb, mapVerb, predictVerb, reportVerb, runVerb, tilesVerb, type VerbResult } from "./verbs.ts";
import { HELP } from "./cli_help.ts";
import {
  dateOption,
  fitOptions,
  flagOf,
  gridOptions,
  headerOption,
  levelOptions,
  maskOption,
  maxMemoryOption,
  optionError,
  pointsSource,
  RENAMED,
  sheetOptions,
  tileOption,
  usage,
  VERB_OPTIONS,
} from "./cli_options.ts";

interface Io {
  out: (s: string) => void;
  /** One line on stderr. */
  err: (s: string) => void;
  /** Stderr when it is a terminal: progress is then a bar redrawn in place (src/cli_progress.ts). */
  terminal?: TerminalWriter;
}

/** Run the CLI with arguments; returns the exit code. */
export async function main(args: string[], io: Io): Promise<number> {
  const verb = args[0];
  const debug = args.includes("--debug");
  let reporter: ProgressReporter | undefined;
  try {
    if (verb === undefined || verb === "--help" || verb === "-h" || verb === "help") {
      io.out(HELP.main);
      return verb === undefined ? ExitCode.usage : 0;
    }
    if (!(verb in HELP) || verb === "main") throw usage(`unknown verb "${verb}"; verbs: fit, grid, contour, predict, map, report, run, tiles (see --help)`);
    // "--base -5": join a value option with a following negative number so it is not read as an option.
    const rest: string[] = [];
    const argv = args.slice(1);
    for (let i = 0; i < argv.length; i++) {
      const a = argv[i];
      const name = a.startsWith("--") && !a.includes("=") ? a.slice(2) : undefined;
      if (name && VERB_OPTIONS[verb][name]?.type === "string" && i + 1 < argv.length && /^-[\d.]/.test(argv[i + 1])) {
        rest.push(`${a}=${argv[++i]}`);
      } else rest.push(a);
    }
    // Option names of the first release, refused with the name that replaced them.
    for (const a of rest) {
      const name = a.startsWith("--") ? a.slice(2).split("=")[0] : undefined;
      if (name && name in RENAMED) throw usage(`--${name} is now ${RENAMED[name]} (see 'deno task rbfield ${verb} --help')`);
    }
    let parsed;
    try {
      parsed = parseArgs({ args: rest, options: VERB_OPTIONS[verb], allowPositionals: true, strict: true });
    } catch (e) {
      throw optionError(verb, rest, e as Error);
    }
    const v = parsed.values as Record<string, unknown>;
    const pos = parsed.positionals;
    if (v.help) {
      io.out(HELP[verb]);
      return 0;
    }
    reporter = progressReporter({ quiet: Boolean(v.quiet), terminal: io.terminal, line: io.err });
    const progress = reporter.progress;
    const wantPositionals = verb === "predict" ? 2 : 1;
    if (verb === "tiles" ? pos.length === 0 : pos.length !== wantPositionals) {
      throw usage(`${verb} takes ${verb === "tiles" ? "one or more tile files" : wantPositionals === 2 ? "MODEL and LOCATIONS" : "one input file"}, got ${pos.length} (see 'deno task rbfield ${verb} --help')`);
    }
    const out = v.out as string | undefined;
    if (!out) throw usage(`${verb} needs --out (see 'deno task rbfield ${verb} --help')`);
    const mask = maskOption(v);
    let result: VerbResult;
    const maxMemory = maxMemoryOption(v);
    if (verb === "fit") result = await fitVerb(pointsSource(pos[0], v), { ...fitOptions(v), progress }, out, [], maxMemory);
    else if (verb === "grid") {
      result = await gridVerb({ model: pos[0], out, stderr: v.stderr as string | undefined, grid: { ...gridOptions(v), progress }, mask, tile: tileOption(v), maxMemory });
    } else if (verb === "tiles") {
      result = await tilesVerb({ tiles: pos, out, maxMemory });
    } else if (verb === "contour") {
      result = await contourVerb({
        input: pos[0],
        out,
        ...levelOptions(v),
        bands: Boolean(v.bands),
        threeD: Boolean(v["3d"]),
        grid: { ...gridOptions(v), progress },
        mask,
        maxMemory,
      });
    } else if (verb === "report") {
      result = await reportVerb({
        model: pos[0],
        out,
        ...levelOptions(v),
        title: v.title as string | undefined,
        date: dateOption(v),
        grid: { ...gridOptions(v), progress },
        mask,
        maxMemory,
      });
    } else if (verb === "map") {
      result = await mapVerb({
        input: pos[0],
        out,
        ...levelOptions(v),
        title: v.title as string | undefined,
        date: dateOption(v),
        sheet: sheetOptions(v),
        grid: { ...gridOptions(v), progress },
        mask,
        maxMemory,
      });
    } else if (verb === "predict") {
      result = await predictVerb({
        model: pos[0],
        locations: pos[1],
        out,
        x: v.x as string | undefined,
        y: v.y as string | undefined,
        header: headerOption(v),
        crs: v.crs as string | undefined,
        progress,
        maxMemory,
      });
    } else {
      result = await runVerb({
        ...pointsSource(pos[0], v),
        outDir: out,
        fit: fitOptions(v),
        grid: gridOptions(v),
        ...levelOptions(v),
        threeD: Boolean(v["3d"]),
        locations: v.locations as string | undefined,
        mask,
        title: v.title as string | undefined,
        date: dateOption(v),
        progress,
        maxMemory,
      });
    }
    reporter.clear();
    for (const w of result.warnings) io.err(`rbfield: warning: ${w}`);
    io.out(v.json ? JSON.stringify(result.json, null, 2) + "\n" : result.text);
    return 0;
  } catch (e) {
    reporter?.clear();
    if (e instanceof RbfieldError) {
      io.err(`rbfield: ${e.messageFor(flagOf).split("\n")[0]}`);
      return e.exitCode;
    }
    io.err(`rbfield: internal error: ${(e as Error)?.message ?? String(e)}${debug ? "" : " (run with --debug for details)"}`);
    if (debug) io.err(String((e as Error)?.stack ?? e));
    return ExitCode.internal;
  } finally {
    reporter?.clear();
  }
}

function writeAll(stream: { writeSync(p: Uint8Array): number }, text: string): void {
  let bytes = new TextEncoder().encode(text);
  while (bytes.length > 0) bytes = bytes.subarray(stream.writeSync(bytes));
}

/** Stderr as a terminal for the progress bar; its width from the console size when known. */
function stderrTerminal(): TerminalWriter {
  return {
    write: (s) => writeAll(Deno.stderr, s),
    get columns() {
      try {
        return Deno.consoleSize().columns;
      } catch {
        return 80;
      }
    },
  };
}

if (import.meta.main) {
  const code = await main(Deno.args, {
    out: (s) => writeAll(Deno.stdout, s),
    err: (s) => writeAll(Deno.stderr, s + "\n"),
    terminal: Deno.stderr.isTerminal() ? stderrTerminal() : undefined,
  });
  Deno.exit(code);
}

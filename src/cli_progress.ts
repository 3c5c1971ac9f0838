// Progress on stderr for the command line, and the only code that knows about terminals. The library
// reports progress(message, fraction?) — the fraction where a loop knows it — and prints nothing.
// Here: when stderr is a terminal, one line redrawn in place, with a bar where the fraction is known
// (drawn by the npm package cli-progress); when it is not (a pipe, a log file), each new message as
// one plain line "rbfield: …"; with --quiet, nothing.
import cliProgress from "cli-progress";
import { printable } from "./errors.ts";

/** Stderr when it is a terminal: raw text (escape sequences included) and its width. */
export interface TerminalWriter {
  write(text: string): void;
  columns?: number;
}

export interface ProgressReporter {
  /** What the library calls; undefined with --quiet. */
  progress?: (message: string, fraction?: number) => void;
  /** Takes the bar off the screen: before any other line on stderr, and at the end. */
  clear(): void;
}

/**
 * The fraction a message states, for library loops that report "row 12 of 300" or "scan 3/7"
 * without passing one; undefined when it states none.
 */
export function statedFraction(message: string): number | undefined {
  const m = /\b(\d+)(?: of |\/)(\d+)\b/.exec(message);
  if (!m) return undefined;
  const done = Number(m[1]), total = Number(m[2]);
  return total > 0 && done <= total ? done / total : undefined;
}

/** Bar cells, and how often the bar may be redrawn (cli-progress's fps). */
const BAR_CELLS = 24;
const REDRAWS_PER_SECOND = 10;

interface Payload {
  message: string;
  known: boolean;
}

/** A progress reporter for the CLI: a bar on a terminal, plain lines elsewhere, nothing when quiet. */
export function progressReporter(o: { quiet: boolean; terminal?: TerminalWriter; line: (text: string) => void }): ProgressReporter {
  if (o.quiet) return { clear() {} };
  const terminal = o.terminal;
  if (!terminal) {
    // One line per new message; a loop's fractions under the same message add none.
    let last = "";
    return {
      progress: (message) => {
        if (message === last) return;
        last = message;
        o.line(`rbfield: ${printable(message)}`);
      },
      clear() {
        last = "";
      },
    };
  }
  // cli-progress writes to a stream; this one forwards to the terminal writer.
  const stream = {
    isTTY: true,
    get columns() {
      return terminal.columns ?? 80;
    },
    write(text: string) {
      terminal.write(text);
      return true;
    },
  };
  const format = (options: Record<string, unknown>, params: { progress: number }, payload: Payload) => {
    const bar = payload.known
      ? `${cliProgress.Format.BarFormat(params.progress, options)} ${String(Math.round(params.progress * 100)).padStart(3)}% `
      : "";
    return `rbfield: ${bar}${payload.message}`;
  };
  let bar: InstanceType<typeof cliProgress.SingleBar> | null = null;
  return {
    progress: (message, fraction) => {
      const f = fraction ?? statedFraction(message);
      const value = f === undefined || !Number.isFinite(f) ? 0 : Math.min(1, Math.max(0, f));
      const payload: Payload = { message: printable(message), known: f !== undefined };
      if (bar === null) {
        bar = new cliProgress.SingleBar({
          stream,
          format,
          barsize: BAR_CELLS,
          fps: REDRAWS_PER_SECOND,
          barCompleteChar: "\u2588",
          barIncompleteChar: "\u2591",
          clearOnComplete: true,
          hideCursor: false,
        });
        bar.start(1, value, payload);
      } else {
        bar.update(value, payload);
      }
    },
    clear() {
      bar?.stop();
      bar = null;
    },
  };
}

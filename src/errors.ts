// One error type for everything a user can cause. The CLI prints `message` as one line and exits
// with `exitCode`; library callers can read the fields.
import type { SourcePlace } from "./types.ts";

/** Exit codes (documented in README.md and DEVELOPERS.md). */
export const ExitCode = {
  /** Internal error: a bug in rbfield. */
  internal: 1,
  /** Bad command line: unknown verb or option, bad option value. */
  usage: 2,
  /** Bad input data: unreadable content, missing columns, too few points, bad model file. */
  input: 3,
  /** A file cannot be read or written (missing, permission, output equals input). */
  io: 4,
  /** The data cannot support the model asked for (e.g. all points on one line for linear trend). */
  numerical: 5,
} as const;
export type ExitCodeValue = (typeof ExitCode)[keyof typeof ExitCode];

/**
 * A reference to a library option inside a message, e.g. `choose a larger cell size (${opt("cell")})`.
 * The library's message says "option cell"; the CLI says "--cell" (see RbfieldError.messageFor).
 */
export function opt(name: string): string {
  return `{${name}}`;
}

const OPTION_TOKEN = /\{([a-zA-Z][a-zA-Z0-9]*)\}/g;

export class RbfieldError extends Error {
  readonly exitCode: ExitCodeValue;
  readonly place?: SourcePlace;
  /** The library options the message refers to (e.g. "trend"), which the CLI names as its flags. */
  readonly options: string[];
  /** The message with its option references unrendered. */
  readonly template: string;
  constructor(message: string, exitCode: ExitCodeValue = ExitCode.input, place?: SourcePlace, option?: string) {
    super(RbfieldError.render(message, place, (n) => `option ${n}`));
    this.name = "RbfieldError";
    this.exitCode = exitCode;
    this.place = place;
    this.template = message;
    this.options = [...new Set([...message.matchAll(OPTION_TOKEN)].map((m) => m[1]).concat(option ? [option] : []))];
  }

  /** The first option the message refers to, if any. */
  get option(): string | undefined {
    return this.options[0];
  }

  /** The message with each option reference written by `name` (the CLI passes its flag names). */
  messageFor(name: (option: string) => string): string {
    return RbfieldError.render(this.template, this.place, name);
  }

  private static render(message: string, place: SourcePlace | undefined, name: (option: string) => string): string {
    const text = message.replace(OPTION_TOKEN, (_m, n: string) => name(n));
    return place ? `${formatPlace(place)}: ${text}` : text;
  }
}

/** "file.csv, line 12, column 3" — the form every input error uses. */
/**
 * Text from an input made safe for one line of terminal output or a report: control characters
 * (terminal escapes, line breaks), Unicode line separators, bidirectional controls and byte-order
 * marks become "?".
 */
export function printable(text: string): string {
  // deno-lint-ignore no-control-regex
  return text.replace(/[\u0000-\u001f\u007f-\u009f\u200e\u200f\u2028-\u202e\u2066-\u2069\ufeff]/g, "?");
}

export function formatPlace(place: SourcePlace): string {
  // A file name with control characters must not break the one-line message or drive a terminal.
  let text = printable(place.file);
  if (place.line !== undefined) text += `, line ${place.line}`;
  if (place.column !== undefined) text += `, column ${place.column}`;
  return text;
}

/** Shorthand for an input error at a place. */
export function inputError(message: string, place: SourcePlace): RbfieldError {
  return new RbfieldError(message, ExitCode.input, place);
}

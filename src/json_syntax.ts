// Where JSON text breaks its grammar (RFC 8259), for a message with line and column: JSON.parse
// says only that it failed, and in engine-specific words.
import { messageText } from "./text.ts";

/** Find the first syntax error in JSON text (RFC 8259 grammar). */
export function locateJsonError(s: string): { offset: number; message: string } | undefined {
  let i = 0;
  class Stop {
    constructor(readonly offset: number, readonly message: string) {}
  }
  const fail = (message: string): never => {
    throw new Stop(Math.min(i, s.length), message);
  };
  const what = () => (i >= s.length ? "unexpected end of file" : `unexpected '${messageText(s[i])}'`);
  const ws = () => {
    while (i < s.length && " \t\n\r".includes(s[i])) i++;
  };
  const lit = (word: string) => {
    for (const ch of word) {
      if (s[i] !== ch) fail(`${what()} (expected '${word}')`);
      i++;
    }
  };
  const str = () => {
    i++;
    while (true) {
      if (i >= s.length) fail("string is not closed");
      const ch = s.charCodeAt(i);
      if (ch === 0x22) return void i++;
      if (ch < 0x20) fail("control character inside a string");
      if (ch === 0x5c) {
        i++;
        if (s[i] === "u") {
          if (!/^[0-9a-fA-F]{4}$/.test(s.slice(i + 1, i + 5))) fail("bad \\u escape");
          i += 5;
        } else if (i < s.length && '"\\/bfnrt'.includes(s[i])) i++;
        else fail("bad escape in a string");
      } else i++;
    }
  };
  const num = () => {
    const m = /^-?(?:0|[1-9]\d*)(?:\.\d+)?(?:[eE][+-]?\d+)?/.exec(s.slice(i, i + 400));
    if (!m) fail(`${what()} (bad number)`);
    i += m![0].length;
  };
  const value = (depth: number): void => {
    if (depth > 5000) fail("nesting too deep");
    ws();
    const c = s[i];
    if (c === "{") {
      i++;
      ws();
      if (s[i] === "}") return void i++;
      while (true) {
        ws();
        if (s[i] !== '"') fail(`${what()} (expected a property name in double quotes)`);
        str();
        ws();
        if (s[i] !== ":") fail(`${what()} (expected ':')`);
        i++;
        value(depth + 1);
        ws();
        if (s[i] === ",") i++;
        else if (s[i] === "}") return void i++;
        else fail(`${what()} (expected ',' or '}')`);
      }
    } else if (c === "[") {
      i++;
      ws();
      if (s[i] === "]") return void i++;
      while (true) {
        value(depth + 1);
        ws();
        if (s[i] === ",") i++;
        else if (s[i] === "]") return void i++;
        else fail(`${what()} (expected ',' or ']')`);
      }
    } else if (c === '"') str();
    else if (c === "-" || (c >= "0" && c <= "9")) num();
    else if (c === "t") lit("true");
    else if (c === "f") lit("false");
    else if (c === "n") lit("null");
    else fail(`${what()} (expected a value)`);
  };
  try {
    value(0);
    ws();
    if (i < s.length) fail("unexpected text after the end of the JSON value");
  } catch (e) {
    if (e instanceof Stop) return { offset: e.offset, message: e.message };
    throw e;
  }
  return undefined;
}

/** The offset and message of a JSON.parse error, when the locator found none. */
export function fromParseMessage(e: unknown, length: number): { offset: number; message: string } {
  const message = e instanceof Error ? e.message : String(e);
  const m = /position (\d+)/.exec(message);
  return { offset: m ? Math.min(Number(m[1]), length) : 0, message };
}

/** Line and column (1-based) of the first syntax error of JSON text that JSON.parse refused with `e`. */
export function jsonErrorPlace(text: string, e: unknown): { line: number; column: number; message: string } {
  const { offset, message } = locateJsonError(text) ?? fromParseMessage(e, text.length);
  const before = text.slice(0, offset);
  return { line: before.split("\n").length, column: offset - before.lastIndexOf("\n"), message };
}

// Reader: text whose cells are separated by runs of spaces and tabs (a cell may be double-quoted
// on one line). Recognised by a first content line with spaces or aligned tabs and no other delimiter.
import { inputError } from "../errors.ts";
import type { TextTable } from "../types.ts";
import type { ReadOptions, TextReader } from "./reader.ts";
import { RowCollector } from "./rows.ts";
import { isSkippedLine, type LineIndex, prepareText, textDelimiter, textReader } from "./textfile.ts";

function sniffText(text: string): number {
  return textDelimiter(text) === "whitespace" ? 0.9 : 0;
}

function parse(text: string, file: string, options: ReadOptions): TextTable {
  const { lines } = prepareText(text, file);
  return whitespaceRows(lines, file, options).finish(options);
}

export const whitespaceReader: TextReader = textReader("whitespace", sniffText, parse);

/** Split every line that is neither empty nor a comment into cells. */
export function whitespaceRows(lines: LineIndex, file: string, options: ReadOptions): RowCollector {
  const out = new RowCollector(file, lines, "whitespace", options.header);
  for (let line = 1; line <= lines.count; line++) {
    const text = lines.text(line);
    if (isSkippedLine(text)) continue;
    const base = lines.starts[line - 1];
    const cells: string[] = [];
    const starts: number[] = [];
    let i = 0;
    while (true) {
      while (i < text.length && (text[i] === " " || text[i] === "\t")) i++;
      if (i >= text.length) break;
      starts.push(base + i);
      if (text[i] === '"') {
        let value = "";
        let j = i + 1;
        let closed = false;
        while (j < text.length) {
          if (text[j] === '"') {
            if (text[j + 1] === '"') {
              value += '"';
              j += 2;
              continue;
            }
            closed = true;
            j++;
            break;
          }
          value += text[j++];
        }
        if (!closed) {
          throw inputError("quoted field has no closing quote on this line; close the quote or remove it", {
            file,
            line,
            column: i + 1,
          });
        }
        cells.push(value);
        i = j;
      } else {
        let j = i;
        while (j < text.length && text[j] !== " " && text[j] !== "\t") j++;
        cells.push(text.slice(i, j));
        i = j;
      }
    }
    out.add(cells, base, (k) => starts[k]);
  }
  return out;
}

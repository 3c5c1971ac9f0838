// The map's typeface and text measurement. Text is set in DejaVu Sans (npm dejavu-fonts-ttf; Bitstream
// Vera licence, free to embed), measured here with fontkit so labels and wrapped lines fit, embedded in
// the PDF and given to the PNG renderer; SVG and HTML viewers fall back to similar sans-serif faces.
import * as fontkit from "fontkit";
import { readFileSync } from "node:fs";
import { createRequire } from "node:module";

export const FONT_FAMILY = "DejaVu Sans";
/** font-family for SVG and HTML. */
export const FONT_STACK = "'DejaVu Sans', Verdana, Geneva, sans-serif";

export interface FontFiles {
  regular: Uint8Array;
  bold: Uint8Array;
}

let files: FontFiles | undefined;

/** The regular and bold DejaVu Sans TrueType files (read once). */
export function fontFiles(): FontFiles {
  if (!files) {
    const require = createRequire(import.meta.url);
    const read = (name: string) => new Uint8Array(readFileSync(require.resolve(`dejavu-fonts-ttf/ttf/${name}`)));
    files = { regular: read("DejaVuSans.ttf"), bold: read("DejaVuSans-Bold.ttf") };
  }
  return files;
}

interface Measurer {
  unitsPerEm: number;
  layout(text: string): { advanceWidth: number };
}
let fonts: { regular: Measurer; bold: Measurer } | undefined;

/** Advance width of `text` set at `size` (same unit as size, here mm). */
export function textWidth(text: string, size: number, bold = false): number {
  if (!fonts) {
    const f = fontFiles();
    // fontkit reads Node Buffers or Uint8Arrays; its types say Buffer.
    const open = (bytes: Uint8Array) => fontkit.create(bytes as unknown as Parameters<typeof fontkit.create>[0]) as unknown as Measurer;
    fonts = { regular: open(f.regular), bold: open(f.bold) };
  }
  const font = bold ? fonts.bold : fonts.regular;
  return (font.layout(text).advanceWidth / font.unitsPerEm) * size;
}

/** Greedy line breaking at spaces to `width`; a word longer than a line is cut between characters. */
export function wrapText(text: string, size: number, width: number, bold = false): string[] {
  const lines: string[] = [];
  let line = "";
  for (const word of text.split(/\s+/).filter((w) => w !== "")) {
    const candidate = line ? `${line} ${word}` : word;
    if (textWidth(candidate, size, bold) <= width) {
      line = candidate;
      continue;
    }
    if (line) lines.push(line);
    line = "";
    let rest = word;
    while (textWidth(rest, size, bold) > width && rest.length > 1) {
      let k = rest.length - 1;
      while (k > 1 && textWidth(rest.slice(0, k), size, bold) > width) k--;
      lines.push(rest.slice(0, k));
      rest = rest.slice(k);
    }
    line = rest;
  }
  if (line) lines.push(line);
  return lines;
}

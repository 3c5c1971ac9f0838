// Paper sizes and print scales.
export type PaperName = "A4" | "A3" | "A1" | "letter" | "tabloid";
export type Orientation = "portrait" | "landscape";

/**
 * Portrait width × height in millimetres: A4, A3, A1 from ISO 216; US Letter (8.5 × 11 in) and
 * Tabloid (11 × 17 in, ANSI B) from ANSI/ASME Y14.1, at 25.4 mm to the inch.
 */
export const PAPER_MM: Record<PaperName, readonly [number, number]> = {
  A4: [210, 297],
  A3: [297, 420],
  A1: [594, 841],
  letter: [215.9, 279.4],
  tabloid: [279.4, 431.8],
};

export const PAPER_NAMES = Object.keys(PAPER_MM) as PaperName[];

/** Page width and height in millimetres. */
export function pageSize(paper: PaperName, orientation: Orientation): { width: number; height: number } {
  const size = PAPER_MM[paper];
  if (!size) throw new Error(`unknown paper ${paper}`);
  const [w, h] = size;
  return orientation === "landscape" ? { width: h, height: w } : { width: w, height: h };
}

/** Paper name as printed: "A4", "US Letter", "Tabloid". */
export function paperLabel(paper: PaperName): string {
  return paper === "letter" ? "US Letter" : paper === "tabloid" ? "Tabloid" : paper;
}

/**
 * The smallest common engineering scale 1:S with S ≥ `minimum` (S from 1, 1.25, 2, 2.5, 5 × 10^k:
 * 1:100, 1:125, 1:200, 1:250, 1:500, 1:1000, 1:1250 …), so a fitted map prints at a round scale.
 */
export function roundScaleAtLeast(minimum: number): number {
  let k = Math.floor(Math.log10(minimum));
  for (;;) {
    for (const m of [1, 1.25, 2, 2.5, 5]) {
      const s = Number(`${m}e${k}`);
      if (s >= minimum * (1 - 1e-12)) return s;
    }
    k++;
  }
}

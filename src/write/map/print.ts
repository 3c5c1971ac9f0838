// PDF and PNG from the map's SVG, so every format shows the same drawing.
// - PDF: pdfkit with svg-to-pdfkit (both MIT): paths and text stay vector (text as text, in embedded
//   DejaVu Sans subsets, so it can be searched and copied); the relief stays the one raster it is.
// - PNG: resvg (@resvg/resvg-wasm, MPL-2.0) as WebAssembly: CPU only, no native build, and no Deno
//   permission beyond reading its own .wasm file (a native addon would need --allow-ffi).
// Both are given the same DejaVu Sans files that measured the labels, and never system fonts, so the
// output does not depend on the machine and is the same byte for byte.
import { initWasm, Resvg } from "@resvg/resvg-wasm";
import PDFDocument from "pdfkit";
import SVGtoPDF from "svg-to-pdfkit";
import { Buffer } from "node:buffer";
import { readFileSync } from "node:fs";
import { createRequire } from "node:module";
import { dirname, join } from "node:path";
import { ExitCode, RbfieldError } from "../../errors.ts";
import { FONT_FAMILY, fontFiles } from "./text.ts";

const POINTS_PER_MM = 72 / 25.4;

/** Page size of an SVG made by renderMap, from its root width and height in millimetres. */
export function svgPageMm(svg: string): { width: number; height: number } {
  const root = /<svg\b[^>]*>/.exec(svg)?.[0] ?? "";
  const w = /\swidth="([\d.]+)mm"/.exec(root), h = /\sheight="([\d.]+)mm"/.exec(root);
  if (!w || !h) throw new RbfieldError("the drawing has no page size in millimetres (not made by renderMap)", ExitCode.internal);
  return { width: Number(w[1]), height: Number(h[1]) };
}

function svgTitle(svg: string): string | undefined {
  const m = /<title>([^<]*)<\/title>/.exec(svg);
  if (!m) return undefined;
  // Undo the XML escaping for the document information dictionary.
  return m[1].replace(/&#(\d+);/g, (_, c) => String.fromCharCode(Number(c))).replace(/&amp;/g, "&").replace(/&lt;/g, "<").replace(/&gt;/g, ">");
}

export interface PdfOptions {
  /**
   * Creation date for the PDF's information dictionary and metadata (pdfkit requires one). Pass the
   * job's date; without it the Unix epoch is written, never the clock, so output is byte-identical.
   */
  creationDate?: Date;
}

/** One-page vector PDF of the SVG, the page the size the SVG states. */
export function mapToPdf(svg: string, options: PdfOptions = {}): Promise<Uint8Array> {
  const page = svgPageMm(svg);
  const size: [number, number] = [page.width * POINTS_PER_MM, page.height * POINTS_PER_MM];
  const title = svgTitle(svg);
  // pdfkit derives the file identifier from the information dictionary, creation date included.
  const doc = new PDFDocument({
    size,
    margin: 0,
    autoFirstPage: true,
    compress: true,
    info: { CreationDate: options.creationDate ?? new Date(0), Creator: "rbfield", Producer: "rbfield (pdfkit)", ...(title ? { Title: title } : {}) },
  });
  const fonts = fontFiles();
  doc.registerFont(FONT_FAMILY, Buffer.from(fonts.regular));
  doc.registerFont(`${FONT_FAMILY} Bold`, Buffer.from(fonts.bold));
  const chunks: Uint8Array[] = [];
  const done = new Promise<Uint8Array>((resolve, reject) => {
    doc.on("data", (c: Uint8Array) => chunks.push(c));
    doc.on("end", () => resolve(new Uint8Array(Buffer.concat(chunks))));
    doc.on("error", reject);
  });
  SVGtoPDF(doc, svg, 0, 0, {
    width: size[0],
    height: size[1],
    preserveAspectRatio: "none",
    fontCallback: (_family: string, bold: boolean) => (bold ? `${FONT_FAMILY} Bold` : FONT_FAMILY),
    warningCallback: (message: string) => {
      throw new RbfieldError(`PDF conversion: ${message}`, ExitCode.internal);
    },
  });
  doc.end();
  return done;
}

let wasmReady: Promise<void> | undefined;

function resvgReady(): Promise<void> {
  if (!wasmReady) {
    const require = createRequire(import.meta.url);
    const wasm = readFileSync(join(dirname(require.resolve("@resvg/resvg-wasm")), "index_bg.wasm"));
    wasmReady = initWasm(wasm);
  }
  return wasmReady;
}

export interface PngOptions {
  /** Resolution in dots per inch (default 150). */
  dpi?: number;
}

/** PNG of the SVG at the given resolution: width = page width in inches × dpi, rounded. */
export async function mapToPng(svg: string, options: PngOptions = {}): Promise<Uint8Array> {
  const dpi = options.dpi ?? 150;
  if (!(dpi > 0 && dpi <= 1200)) throw new RbfieldError(`the PNG resolution must be between 1 and 1200 dpi, not ${dpi}`, ExitCode.usage);
  await resvgReady();
  const page = svgPageMm(svg);
  const fonts = fontFiles();
  const resvg = new Resvg(svg, {
    fitTo: { mode: "width", value: Math.round((page.width / 25.4) * dpi) },
    background: "#ffffff",
    font: { fontBuffers: [fonts.regular, fonts.bold], loadSystemFonts: false, defaultFontFamily: FONT_FAMILY, sansSerifFamily: FONT_FAMILY },
  });
  try {
    return resvg.render().asPng();
  } finally {
    resvg.free();
  }
}

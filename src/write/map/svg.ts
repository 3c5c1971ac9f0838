// Small pieces for writing SVG and HTML text: escaping, coordinates, paths.
import { printable } from "../../errors.ts";

/**
 * Text made safe inside an XML or HTML element or a quoted attribute: control characters (which
 * XML 1.0 forbids and terminals act on) become "?", then & < > " ' become character references.
 */
export function escapeXml(text: string): string {
  return printable(String(text)).replace(/[&<>"']/g, (c) => `&#${c.charCodeAt(0)};`);
}

/** A coordinate for SVG syntax: rounded to `decimals`, ASCII minus, no trailing zeros. */
export function n(v: number, decimals = 2): string {
  const r = Number(v.toFixed(decimals));
  return String(r === 0 ? 0 : r);
}

/** "M x y L x y …" for a polyline in paper units (closed with Z when asked). */
export function pathData(points: ArrayLike<readonly [number, number]>, close = false, decimals = 2): string {
  let d = "";
  for (let i = 0; i < points.length; i++) d += `${i === 0 ? "M" : "L"}${n(points[i][0], decimals)} ${n(points[i][1], decimals)}`;
  return close && points.length > 0 ? d + "Z" : d;
}

/** An element with attributes (values are escaped; undefined ones left out) and optional raw content. */
export function el(name: string, attributes: Record<string, string | number | undefined>, content?: string): string {
  let out = `<${name}`;
  for (const [k, v] of Object.entries(attributes)) {
    if (v === undefined) continue;
    out += ` ${k}="${typeof v === "number" ? n(v, 3) : escapeXml(v)}"`;
  }
  return content === undefined ? `${out}/>` : `${out}>${content}</${name}>`;
}

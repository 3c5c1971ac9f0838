// Opens a file in a real headless Chromium (Debian package `chromium`, driven by npm playwright-core)
// and records what a user's browser would: console messages, page errors, dialogs (an injected
// alert would open one) and every request other than the file itself. Tests skip when Chromium is
// missing locally and fail when the environment variable CI is set.
import { existsSync, mkdirSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";
import process from "node:process";
import { pathToFileURL } from "node:url";
import { type Browser, chromium, type Page } from "playwright-core";

const CANDIDATES = ["/usr/bin/chromium", "/usr/bin/chromium-browser", "/usr/lib/chromium/chromium"];
export const chromiumPath = CANDIDATES.find((p) => existsSync(p));
export const skipChromium = !chromiumPath && !process.env.CI;
if (skipChromium) console.warn("chromium not found: browser checks skipped (they fail instead when CI is set)");

/** Where screenshots are kept after the run. */
export const ARTEFACTS = join(tmpdir(), "rbfield-test-artefacts");

export interface Visit {
  page: Page;
  console: string[];
  errors: string[];
  dialogs: string[];
  requests: string[];
}

let browser: Browser | undefined;

export async function startBrowser(): Promise<void> {
  if (!chromiumPath) throw new Error("Chromium is not installed (Debian package chromium); CI must install it");
  // Flags as for a machine with no network: no background traffic, no sandbox (tests run as root).
  browser = await chromium.launch({
    executablePath: chromiumPath,
    args: ["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update", "--disable-sync", "--no-first-run", "--disable-default-apps"],
  });
}

export async function stopBrowser(): Promise<void> {
  await browser?.close();
  browser = undefined;
}

/** Open a local file, wait for it to load, and report what happened. */
export async function visit(file: string, viewport = { width: 1200, height: 900 }): Promise<Visit> {
  const context = await browser!.newContext({ viewport, offline: true });
  const page = await context.newPage();
  const url = pathToFileURL(file).href;
  const v: Visit = { page, console: [], errors: [], dialogs: [], requests: [] };
  page.on("console", (m) => v.console.push(`${m.type()}: ${m.text()}`));
  page.on("pageerror", (e) => v.errors.push(String(e)));
  page.on("dialog", (d) => {
    v.dialogs.push(d.message());
    void d.dismiss();
  });
  page.on("request", (r) => {
    if (r.url() !== url && !r.url().startsWith("data:")) v.requests.push(r.url());
  });
  await page.goto(url, { waitUntil: "load" });
  return v;
}

/**
 * Save a screenshot under ARTEFACTS and return its path: the whole page for HTML, the viewport for an
 * SVG document (Chromium cannot measure a "full page" of one; size the viewport to the sheet).
 */
export async function screenshot(v: Visit, name: string, fullPage = true): Promise<string> {
  mkdirSync(ARTEFACTS, { recursive: true });
  const path = join(ARTEFACTS, name);
  await v.page.screenshot({ path, fullPage });
  return path;
}

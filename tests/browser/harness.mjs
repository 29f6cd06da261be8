// Shared set-up for the page tests: serve www/ on loopback, drive Debian's headless Chromium.
import { mkdirSync } from "node:fs";
import path from "node:path";
import { fileURLToPath } from "node:url";
import { chromium } from "playwright-core";
import { startServer } from "../../scripts/serve.mjs";

const HERE = path.dirname(fileURLToPath(import.meta.url));
export const ARTIFACTS = path.join(HERE, "artifacts");
export const DEMO_DIR = path.join(HERE, "..", "..", "demo-data");

const CHROMIUM = process.env.CHROMIUM ?? "/usr/bin/chromium";
// Flags for a closed network and a root user (see shared toolchain notes).
const CHROMIUM_ARGS = [
  "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
  "--disable-background-networking", "--disable-component-update", "--disable-sync",
];

/** Start the server and the browser; returns helpers and a `close()`. */
export async function openApp() {
  mkdirSync(ARTIFACTS, { recursive: true });
  const server = await startServer(0);
  const origin = `http://127.0.0.1:${server.address().port}`;
  const browser = await chromium.launch({ executablePath: CHROMIUM, args: CHROMIUM_ARGS, headless: true });
  const context = await browser.newContext({ viewport: { width: 1100, height: 1300 } });
  const foreignRequests = [];
  const consoleErrors = [];
  // Any request that leaves the page's own origin is recorded and refused.
  await context.route("**/*", (route) => {
    const url = route.request().url();
    if (url.startsWith(origin + "/") || url.startsWith("data:") || url.startsWith("blob:")) {
      return route.continue();
    }
    foreignRequests.push(url);
    return route.abort();
  });
  const page = await context.newPage();
  page.on("console", (msg) => { if (msg.type() === "error") consoleErrors.push(msg.text()); });
  page.on("pageerror", (err) => consoleErrors.push(String(err)));
  page.on("dialog", (dialog) => { consoleErrors.push(`unexpected dialog: ${dialog.message()}`); dialog.dismiss(); });

  async function load() {
    await page.goto(`${origin}/index.html`);
    await page.waitForSelector("body[data-ready='true']", { timeout: 20_000 });
  }

  /** Count canvas pixels that differ from white: a blank canvas has none. */
  async function paintedPixels(selector) {
    return page.$eval(selector, (canvas) => {
      const { data } = canvas.getContext("2d").getImageData(0, 0, canvas.width, canvas.height);
      let painted = 0;
      for (let i = 0; i < data.length; i += 4) {
        if (data[i + 3] > 0 && (data[i] < 250 || data[i + 1] < 250 || data[i + 2] < 250)) painted++;
      }
      return painted;
    });
  }

  /** Pixels of exactly one RGB colour (e.g. an instrument's marker colour). */
  async function pixelsOfColour(selector, [r, g, b]) {
    return page.$eval(selector, (canvas, rgb) => {
      const { data } = canvas.getContext("2d").getImageData(0, 0, canvas.width, canvas.height);
      let n = 0;
      for (let i = 0; i < data.length; i += 4) {
        if (data[i] === rgb[0] && data[i + 1] === rgb[1] && data[i + 2] === rgb[2]) n++;
      }
      return n;
    }, [r, g, b]);
  }

  async function screenshot(name) {
    await page.screenshot({ path: path.join(ARTIFACTS, `${name}.png`), fullPage: true });
  }

  async function close() {
    await browser.close();
    await new Promise((resolve) => server.close(resolve));
  }

  return { page, origin, load, paintedPixels, pixelsOfColour, screenshot, close, foreignRequests, consoleErrors };
}

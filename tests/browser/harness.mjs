// Shared set-up for the page tests: serve www/ on loopback, drive Debian's headless Chromium;
// `pageForThisFile()` opens the page once per test file, `tempDirForThisFile()` gives a scratch
// folder removed after it, and ROOT / CLI / MAKE_TABLES name the built command-line programs.
import { after, before } from "node:test";
import { mkdirSync, mkdtempSync, rmSync } from "node:fs";
import { tmpdir } from "node:os";
import path from "node:path";
import { fileURLToPath } from "node:url";
import { chromium } from "playwright-core";
import { startServer } from "../../scripts/serve.mjs";

const HERE = path.dirname(fileURLToPath(import.meta.url));
export const ARTIFACTS = path.join(HERE, "artifacts");
export const DEMO_DIR = path.join(HERE, "..", "..", "demo-data");
/** The repository's root. */
export const ROOT = path.resolve(HERE, "..", "..");
const TARGET = process.env.CARGO_TARGET_DIR ?? path.join(ROOT, "target");
/** The native command line the page's results are compared with (built by `cargo build --release`). */
export const CLI = path.join(TARGET, "release", "eccaudit");
/** The simulated survey tables' generator (`examples/make_survey_tables.rs`). */
export const MAKE_TABLES = path.join(TARGET, "release", "examples", "make_survey_tables");

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

  /** Load `text` as file `name` through the page's file input; waits for the attempt to end. */
  async function dropText(text, name) {
    const attempts = await page.evaluate(() => Number(document.body.dataset.loadAttempts ?? 0));
    await page.setInputFiles("#file-input", { name, mimeType: "text/plain", buffer: Buffer.from(text) });
    await page.waitForFunction((n) => Number(document.body.dataset.loadAttempts) > n, attempts);
  }

  /** Choose demo table `index` in the menu; waits for its load attempt to end. */
  async function selectDemo(index) {
    const attempts = await page.evaluate(() => Number(document.body.dataset.loadAttempts ?? 0));
    await page.selectOption("#demo-select", String(index));
    await page.waitForFunction((n) => Number(document.body.dataset.loadAttempts) > n, attempts);
  }

  /** Click `selector`, save the download it starts as `file`; returns the file and the suggested name. */
  async function saveDownload(selector, file) {
    const [download] = await Promise.all([page.waitForEvent("download"), page.click(selector)]);
    await download.saveAs(file);
    return { file, suggested: download.suggestedFilename() };
  }

  async function close() {
    await browser.close();
    await new Promise((resolve) => server.close(resolve));
  }

  return {
    page, origin, load, paintedPixels, pixelsOfColour, screenshot, dropText, selectDemo, saveDownload, close,
    foreignRequests, consoleErrors,
  };
}

/**
 * The page, opened and loaded once for the calling test file (node:test `before`/`after`
 * hooks): the returned object gets the fields of `openApp()` before the first test runs;
 * `ready(app)`, when given, runs next in the same hook (e.g. to choose a demo table).
 */
export function pageForThisFile(ready = null) {
  const app = {};
  let opened = null;
  before(async () => {
    opened = await openApp();
    Object.assign(app, opened);
    await opened.load();
    if (ready) await ready(app);
  });
  after(async () => {
    await opened?.close();
  });
  return app;
}

/** A scratch folder named `eccaudit-PREFIX-…` under the system's, removed after the file's tests. */
export function tempDirForThisFile(prefix) {
  const dir = mkdtempSync(path.join(tmpdir(), `eccaudit-${prefix}-`));
  after(() => rmSync(dir, { recursive: true, force: true }));
  return dir;
}

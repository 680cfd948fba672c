// SPDX-License-Identifier: MIT
// Browser end-to-end test of the upload page: start `veq serve`, upload a run in headless Chromium,
// wait for the results, check the endpoint volume shown against the JSON download, save a screenshot.
// Usage: node upload.mjs VEQ_BINARY RUN_FILE SCREENSHOT_PNG
// Exit 0 pass, 1 fail, 125 skipped (no Chromium or no playwright-core).
import { spawn } from "node:child_process";
import { existsSync } from "node:fs";
import { createRequire } from "node:module";
import { join } from "node:path";

const [veq, runFile, screenshot] = process.argv.slice(2);
const chromium = "/usr/bin/chromium";
// In CI (VEQ_E2E_REQUIRED=1) a missing browser or driver is a failure, not a skip.
const skip = process.env.VEQ_E2E_REQUIRED === "1" ? 1 : 125;
if (!existsSync(chromium)) {
  console.log("skipped: no /usr/bin/chromium (Debian package chromium)");
  process.exit(skip);
}
// playwright-core is installed by scripts/test into <build>/e2e (VEQ_E2E_DIR), not into the sources.
let playwright;
try {
  const require = createRequire(join(process.env.VEQ_E2E_DIR || ".", "package.json"));
  playwright = require("playwright-core");
} catch {
  console.log("skipped: playwright-core is not installed (scripts/test installs it into <build>/e2e)");
  process.exit(skip);
}

const server = spawn(veq, ["serve", "--port", "0"], { stdio: ["ignore", "pipe", "inherit"] });
const url = await new Promise((resolve, reject) => {
  let out = "";
  server.stdout.on("data", (d) => {
    out += d;
    const m = out.match(/http:\/\/127\.0\.0\.1:(\d+)\//);
    if (m) resolve(m[0]);
  });
  server.on("exit", (code) => reject(new Error("veq serve exited with " + code)));
  setTimeout(() => reject(new Error("veq serve did not start")), 10000);
});

let failed = false;
const fail = (msg) => { console.error("FAIL: " + msg); failed = true; };
const browser = await playwright.chromium.launch({
  executablePath: chromium,
  args: ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync"],
});
try {
  const page = await browser.newPage();
  page.on("pageerror", (e) => fail("page error: " + e.message));
  await page.goto(url);
  const caution = await page.textContent(".caution");
  if (!/eye\s+protection/.test(caution)) fail("no safety caution on the page");
  await page.setInputFiles("#files", runFile);
  await page.waitForSelector("#results tbody tr", { timeout: 20000 });
  const shown = await page.textContent("#results tbody tr td:nth-child(3)");
  const jsonHref = await page.getAttribute("#results tbody tr a:has-text('JSON')", "href");
  const json = await page.evaluate(async (href) => (await fetch(href)).json(), jsonHref);
  const expected = json.endpoints[0].volume_mL.toFixed(3);
  if (!shown.startsWith(expected)) fail(`endpoint shown '${shown}', JSON says ${expected}`);
  else console.log(`endpoint shown ${shown}; JSON ${json.endpoints[0].volume_mL}`);
  await page.screenshot({ path: screenshot, fullPage: true });
  console.log("screenshot: " + screenshot);
} catch (e) {
  fail(String(e));
} finally {
  await browser.close();
  server.kill();
}
process.exit(failed ? 1 : 0);

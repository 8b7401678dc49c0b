// Opens an xsflow HTML report in headless Chromium (Debian's, /usr/bin/chromium) and checks
// what a person relies on: the pages load without console errors, every link and image
// resolves, the failed run is listed first with its message, and no page scrolls sideways
// at phone width (400 px). Screenshots go to the artefact folder.
//
// usage: node check_report.mjs REPORT_DIR BROKEN_RUN MESSAGE_PART SCREENSHOT_DIR
import { chromium } from "playwright-core";
import { existsSync, mkdirSync } from "node:fs";
import { join, resolve } from "node:path";
import { fileURLToPath, pathToFileURL } from "node:url";

const [reportDir, brokenRun, messagePart, shots] = process.argv.slice(2);
if (!shots) {
  console.error("usage: node check_report.mjs REPORT_DIR BROKEN_RUN MESSAGE_PART SCREENSHOT_DIR");
  process.exit(2);
}
mkdirSync(shots, { recursive: true });
const failures = [];
const fail = (what) => {
  failures.push(what);
  console.error(`FAIL ${what}`);
};

const browser = await chromium.launch({
  executablePath: process.env.CHROMIUM ?? "/usr/bin/chromium",
  args: [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
  ],
});

// Load one page at a width; return what it links to. Console errors, failed requests and
// broken images are failures.
async function visit(file, width, shot) {
  const context = await browser.newContext({ viewport: { width, height: 900 } });
  const page = await context.newPage();
  const url = pathToFileURL(file).href;
  page.on("console", (m) => {
    if (m.type() === "error") fail(`${file} at ${width}px: console error: ${m.text()}`);
  });
  page.on("pageerror", (e) => fail(`${file}: page error: ${e.message}`));
  page.on("requestfailed", (r) => fail(`${file}: request failed: ${r.url()}`));
  await page.goto(url, { waitUntil: "load" });
  const facts = await page.evaluate(() => ({
    scrollWidth: document.documentElement.scrollWidth,
    clientWidth: document.documentElement.clientWidth,
    brokenImages: [...document.images].filter((i) => !i.complete || i.naturalWidth === 0).map((i) => i.src),
    links: [...document.querySelectorAll("a[href]")].map((a) => a.href),
    text: document.body.innerText,
    firstSection: document.querySelector("main section")?.id ?? "",
    svgs: document.querySelectorAll("svg").length,
  }));
  if (facts.scrollWidth > facts.clientWidth) {
    fail(`${file} at ${width}px: scrolls sideways (${facts.scrollWidth} > ${facts.clientWidth})`);
  }
  for (const src of facts.brokenImages) fail(`${file}: image does not load: ${src}`);
  await page.screenshot({ path: join(shots, shot), fullPage: true });
  await context.close();
  return facts;
}

const index = resolve(reportDir, "index.html");
if (!existsSync(index)) {
  fail(`no report at ${index}`);
} else {
  const wide = await visit(index, 1280, "index-1280.png");
  const narrow = await visit(index, 400, "index-400.png");
  if (wide.firstSection !== "failed") fail(`index: the first section is '${wide.firstSection}', not the failed runs`);
  if (!wide.text.includes(`Failed runs`) || !wide.text.includes(brokenRun) || !wide.text.includes(messagePart)) {
    fail(`index: the failed run ${brokenRun} with '${messagePart}' is not listed`);
  }
  if (wide.svgs < 2) fail(`index: ${wide.svgs} plot(s), expected the run health and the angular distribution`);
  const pages = new Set();
  for (const href of [...wide.links, ...narrow.links]) {
    const target = fileURLToPath(href.split("#")[0]);
    if (!existsSync(target)) fail(`index: link does not resolve: ${href}`);
    else if (target.endsWith(".html")) pages.add(target);
  }
  let n = 0;
  for (const p of pages) {
    const facts = await visit(p, 400, `run-${n++}-400.png`);
    for (const href of facts.links) {
      if (!existsSync(fileURLToPath(href.split("#")[0]))) fail(`${p}: link does not resolve: ${href}`);
    }
  }
  console.log(`checked ${pages.size + 1} page(s) at 1280 and 400 px; screenshots in ${shots}`);
}
await browser.close();
if (failures.length > 0) {
  console.error(`${failures.length} failure(s)`);
  process.exit(1);
}
console.log("report browser check passed");

// Shared helpers of the browser tests and the benchmark: launch Debian's Chromium through
// playwright-core, open the page from file://, watch every request and console message, and run
// the command line for reference outputs.
'use strict';

const { execFileSync } = require('node:child_process');
const fs = require('node:fs');
const path = require('node:path');
const { pathToFileURL } = require('node:url');

const ROOT = path.resolve(__dirname, '..', '..');
const WWW = path.join(ROOT, 'www');
const PAGE_URL = pathToFileURL(path.join(WWW, 'index.html')).href;
const OUT = path.join(__dirname, 'out');
const CHROMIUM = process.env.CHROMIUM || '/usr/bin/chromium';

// The page's classic scripts, in the order index.html loads them: the wasm core first, then the
// form (which makes the shared namespace), drawing, the study, the live loop and the start.
const SCRIPTS = ['rolloff-wasm.js', 'form.js', 'render.js', 'study.js', 'live.js', 'main.js'];

// The files the page may load: itself, its stylesheet and its scripts. Nothing else.
const OWN_FILES = ['index.html', 'style.css'].concat(SCRIPTS).map(
  (name) => pathToFileURL(path.join(WWW, name)).href,
);

function loadPlaywright() {
  try {
    return require('playwright-core');
  } catch (error) {
    throw new Error('playwright-core is missing: run `npm ci` (or ./build.sh test) first');
  }
}

function checkBuilt() {
  if (!fs.existsSync(CHROMIUM)) {
    throw new Error(`Chromium not found at ${CHROMIUM}: apt-get install chromium chromium-driver (./build.sh test does)`);
  }
  if (!fs.existsSync(path.join(WWW, 'rolloff-wasm.js'))) {
    throw new Error('www/rolloff-wasm.js is missing: run ./build.sh first');
  }
}

async function launch() {
  checkBuilt();
  const { chromium } = loadPlaywright();
  return chromium.launch({
    executablePath: CHROMIUM,
    headless: true,
    args: ['--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run',
      '--disable-background-networking', '--disable-component-update', '--disable-sync'],
  });
}

/* A page with every request, console error and page error recorded in `log`. */
async function openPage(browser, query, options = {}) {
  const context = await browser.newContext({
    viewport: { width: 1366, height: 768 },
    colorScheme: options.colorScheme || 'light',
    acceptDownloads: true,
    deviceScaleFactor: options.deviceScaleFactor || 1,
  });
  const page = await context.newPage();
  const log = { requests: [], errors: [] };
  page.on('request', (request) => log.requests.push(request.url()));
  page.on('console', (message) => {
    if (message.type() === 'error') log.errors.push(`console: ${message.text()}`);
  });
  page.on('pageerror', (error) => log.errors.push(`page error: ${error.message}`));
  if (options.initScript) await page.addInitScript(options.initScript);
  await page.goto(PAGE_URL + (query ? '?' + query.replace(/^\?/, '') : ''));
  await page.waitForSelector('body[data-ready="1"]', { timeout: 15000 });
  return { context, page, log };
}

/* Requests that are not the page's own files (blob: URLs the page makes for downloads are local
 * objects, not requests to anywhere, and are allowed). */
function foreignRequests(log) {
  return log.requests.filter((url) => {
    const bare = url.split('?')[0].split('#')[0];
    return !OWN_FILES.includes(bare) && !url.startsWith('blob:');
  });
}

function cliPath() {
  for (const profile of ['release', 'debug']) {
    const candidate = path.join(ROOT, 'target', profile, 'rolloff');
    if (fs.existsSync(candidate)) return candidate;
  }
  throw new Error('the rolloff command line is not built: run cargo build --release (./build.sh test does)');
}

/* `rolloff design LINK --format FORMAT` output, as text. */
function cli(args) {
  return execFileSync(cliPath(), args, { encoding: 'utf8' });
}

/* Reads engineering notation as the page writes it: 4.99k, 22n, 1.5M, −3 (typographic minus). */
function parseEng(text) {
  const clean = String(text).replace(/\u2212/g, '-').replace(/[ΩFHz\sV/]+$/u, '').trim();
  const match = /^(-?[0-9.]+(?:e[-+]?\d+)?)\s*([pnuµmkMG]?)/.exec(clean);
  if (!match) return NaN;
  const scale = { p: 1e-12, n: 1e-9, u: 1e-6, 'µ': 1e-6, m: 1e-3, '': 1, k: 1e3, M: 1e6, G: 1e9 }[match[2]];
  return Number(match[1]) * scale;
}

/* A fingerprint of each canvas's pixels, keyed by a description of the canvas. */
async function canvasPixels(page) {
  return page.evaluate(() => {
    const out = {};
    const canvases = Array.from(document.querySelectorAll('canvas'));
    canvases.forEach((canvas, index) => {
      const key = canvas.id || canvas.getAttribute('data-plot') || ('stage-' + canvas.getAttribute('data-stage')) || String(index);
      const name = (canvas.hasAttribute('data-compact') ? 'thumb:' : '') + key + '#' + index;
      out[name] = canvas.width && canvas.height ? canvas.toDataURL('image/png') : '';
    });
    return out;
  });
}

/* Waits until a tolerance study has finished after `since` (the page stamps its duration). */
async function waitForStudy(page, previous) {
  await page.waitForFunction((prev) => {
    const stamp = document.body.getAttribute('data-study-done');
    return stamp && stamp !== prev;
  }, previous || null, { timeout: 30000 });
  return page.evaluate(() => document.body.getAttribute('data-study-done'));
}

module.exports = {
  ROOT, WWW, OUT, PAGE_URL, SCRIPTS, launch, openPage, foreignRequests, cli, parseEng, canvasPixels,
  waitForStudy,
};

// The tolerance study's memory in the page: an order-12 design studied through the page's own
// study path (the Runs field and the Run button; www/study.js calls the wasm study_start,
// study_step, study_summarize and study_finish in chunks). The wasm heap is the size of the
// module's memory (`memory.buffer.byteLength`, taken from the instance as the page instantiates
// it): it grows when the heap needs more and is never given back, so it is the most the study
// has held at once.
//
// Checks (the bound of src/analysis/tolerance/envelope.rs and mod.rs "Memory"): the heap stays
// under 64 MB; doubling the runs from 10,000 to 20,000 adds at most 256 bytes per run (what is
// kept per run: 8 bytes per reading, 16 readings for six stages = 128 bytes, and the allocator's
// slack; the whole curve of every run, 964 bytes at the page's 241 points, is not kept); a second
// study of the same size grows the heap by no more than a few of the allocator's pages.
//
// ROLLOFF_MEMORY_RUNS sets the largest study (20,000 by default, what CI affords; 100,000 for the
// report). ROLLOFF_PAGE_DIR points at another build of the page (for a before/after comparison;
// the growth checks then only print).
'use strict';

const { test, before, after } = require('node:test');
const assert = require('node:assert/strict');
const path = require('node:path');
const { pathToFileURL } = require('node:url');
const h = require('./helpers');

const MAX_RUNS = Number(process.env.ROLLOFF_MEMORY_RUNS || 20000);
const PAGE_DIR = process.env.ROLLOFF_PAGE_DIR || h.WWW;
const PAGE_URL = pathToFileURL(path.join(PAGE_DIR, 'index.html')).href;
const LIMIT_BYTES = 64 * 1024 * 1024;
// An order-12 Butterworth low-pass of six Sallen-Key stages, the study not rerun on each change.
const LINK = 'v=2&order=12&fc=1k&runs=10000';

// The wasm instance's memory, kept where the test can read it: the page instantiates its
// inlined bytes with WebAssembly.instantiate (wasm-bindgen's loader).
const KEEP_MEMORY = `(() => {
  const instantiate = WebAssembly.instantiate;
  WebAssembly.instantiate = function (...args) {
    return instantiate.apply(this, args).then((result) => {
      const instance = result.instance || result;
      if (instance.exports && instance.exports.memory) window.__rolloffMemory = instance.exports.memory;
      return result;
    });
  };
})();`;

let browser;
before(async () => { browser = await h.launch(); });
after(async () => { if (browser) await browser.close(); });

const MB = (bytes) => (bytes / 1048576).toFixed(2) + ' MB';

test(`studies of up to ${MAX_RUNS} runs of an order-12 design keep the wasm heap under 64 MB`, { timeout: 3 * 3600 * 1000 }, async () => {
  const context = await browser.newContext({ viewport: { width: 1366, height: 768 } });
  const page = await context.newPage();
  const errors = [];
  const requests = [];
  page.on('request', (request) => requests.push(request.url()));
  page.on('pageerror', (error) => errors.push(`page error: ${error.message}`));
  page.on('console', (message) => { if (message.type() === 'error') errors.push(`console: ${message.text()}`); });
  await page.addInitScript(KEEP_MEMORY);
  await page.goto(PAGE_URL + '?' + LINK);
  await page.waitForSelector('body[data-ready="1"]', { timeout: 30000 });
  const heap = () => page.evaluate(() => window.__rolloffMemory.buffer.byteLength);
  const opened = await heap();
  // The study on opening is the page's own (rerun after each change is on); it is waited for,
  // then each study is started by the Run button with the Runs field set.
  let stamp = await waitForStudy(page, null, 10000);
  await page.uncheck('#study-auto');
  const figures = [{ runs: 10000, heap: await heap(), ms: Number(await page.getAttribute('body', 'data-study-ms')) }];
  const sizes = MAX_RUNS > 20000 ? [20000, MAX_RUNS, MAX_RUNS] : [20000, 20000];
  for (const runs of sizes) {
    await page.fill('input[name="runs"]', String(runs));
    await page.dispatchEvent('input[name="runs"]', 'change');
    await page.waitForFunction((n) => window.location.search.includes('runs=' + n), runs);
    await page.click('#study-run');
    stamp = await waitForStudy(page, stamp, runs);
    const status = await page.textContent('#study-status');
    assert.ok(status.includes(String(runs)), `the study did not run ${runs} runs: “${status}”`);
    figures.push({ runs, heap: await heap(), ms: Number(await page.getAttribute('body', 'data-study-ms')) });
  }
  await context.close();
  console.log(`wasm heap (${PAGE_DIR}): on opening ${MB(opened)}; `
    + figures.map((f) => `after ${f.runs} runs ${MB(f.heap)} (study ${f.ms} ms)`).join('; '));
  assert.deepEqual(errors, [], 'console or page errors');
  assert.deepEqual(requests.filter((u) => !u.startsWith('file:') && !u.startsWith('blob:')), [], 'network requests');
  if (process.env.ROLLOFF_PAGE_DIR) return;
  for (const f of figures) assert.ok(f.heap < LIMIT_BYTES, `after ${f.runs} runs: ${MB(f.heap)}`);
  const at10k = figures[0].heap;
  const at20k = figures.find((f) => f.runs === 20000).heap;
  assert.ok((at20k - at10k) / 10000 <= 256, `10,000 more runs grew the heap by ${MB(at20k - at10k)}`);
  // A second study of the same size reuses what the first gave back: at most a few 64 kB pages
  // of the allocator's own (keeping its readings would take runs × 128 bytes, 2.4 MB at 20,000).
  const last = figures[figures.length - 1];
  const previous = figures[figures.length - 2];
  assert.ok(last.heap - previous.heap <= 256 * 1024, `a second study of ${last.runs} runs grew the heap: ${MB(previous.heap)} → ${MB(last.heap)}`);
});

/* Waits until a study has finished after the one stamped `previous` (data-study-done), allowing
 * about a millisecond per run on a loaded machine. */
async function waitForStudy(page, previous, runs) {
  await page.waitForFunction((prev) => {
    const stamp = document.body.getAttribute('data-study-done');
    return stamp && stamp !== prev;
  }, previous, { timeout: 60000 + runs * 3 });
  return page.getAttribute('body', 'data-study-done');
}

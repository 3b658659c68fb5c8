// Browser benchmark of the page (not a test): headless Debian Chromium opens www/index.html from
// file:// and reports
//   - open → first plot drawn (navigation start to the end of the first full redraw),
//   - edit → every plot redrawn, median over typed cutoffs, for an 8th-order design: from the
//     input event to the end of the redraw (an edit after a quiet frame is worked at once), the
//     update's own work, and until the frame after the one that shows it (an upper bound on
//     when the new pixels are on screen),
//   - a 10,000-run tolerance study: its duration and the longest gap between animation frames
//     while it runs (the page stays responsive when that gap stays near one frame),
//   - the tolerance-study kernel's stage-evaluations/s in wasm, on the native criterion
//     benchmark's board (ROLLOFF_BENCH_NATIVE=1 also runs `cargo bench --bench montecarlo` after
//     it and prints both, measured in the same minutes),
//   - the size of the wasm core (raw and gzipped) and of the page's script.
// Run: ./build.sh bench   (or: ./build.sh && node tests/browser/bench.js)
'use strict';

const { execFileSync } = require('node:child_process');
const fs = require('node:fs');
const path = require('node:path');
const zlib = require('node:zlib');
const h = require('./helpers');

// The geophone demo: 8th-order Butterworth, four multiple-feedback stages, limits from the converter.
const LINK = 'v=1&title=Geophone+front+end&fsample=2k&adcbits=24&fsignal=200&family=butterworth&topo=mfb';
const N_OPEN = 5;
const N_EDITS = 40;
// The study-kernel figure: step(2000) as the native benchmark, 9 fresh studies, 2 of warm-up.
const KERNEL_RUNS = 2000;
const KERNEL_REPEATS = 9;
const KERNEL_WARMUP = 2;

function median(values) {
  const sorted = values.slice().sort((a, b) => a - b);
  const mid = Math.floor(sorted.length / 2);
  return sorted.length % 2 ? sorted[mid] : (sorted[mid - 1] + sorted[mid]) / 2;
}

function percentile(values, p) {
  const sorted = values.slice().sort((a, b) => a - b);
  return sorted[Math.min(sorted.length - 1, Math.floor((p / 100) * sorted.length))];
}

async function main() {
  const browser = await h.launch();
  const results = {};

  const opens = [];
  const phases = [];
  for (let i = 0; i < N_OPEN; i++) {
    const { page, context } = await h.openPage(browser, LINK + '&runs=1');
    opens.push(Number(await page.getAttribute('body', 'data-first-draw-ms')));
    phases.push(JSON.parse((await page.getAttribute('body', 'data-opening')) || '{}'));
    await context.close();
  }
  results.open_to_first_plot_ms = { median: median(opens), runs: opens };
  // When each step of opening ended (ms since navigation start, median of the opens): the page
  // script running, the wasm bytes decoded, the core compiled, the page's code started, and the
  // first design drawn.
  results.opening_steps_ms = {};
  for (const key of ['script', 'decoded', 'compiled', 'instantiated', 'started', 'drawn', 'all_drawn']) {
    results.opening_steps_ms[key] = median(phases.map((p) => p[key]).filter(Number.isFinite));
  }

  const { page, context } = await h.openPage(browser, LINK);
  await page.uncheck('#study-auto');
  // Each edit types a new cutoff into the field (an input event, as a keystroke makes) after a
  // quiet frame, then waits for two animation frames: the first starts the frame that shows the
  // redrawn canvases, the second comes once that frame is done (its style, layout and paint
  // included), so `edit_to_frame_shown_ms` bounds the time until the pixels are on screen.
  const timings = await page.evaluate(async (n) => {
    const raf = () => new Promise((resolve) => requestAnimationFrame(resolve));
    const input = document.querySelector('input[name="fsignal"]');
    const out = [];
    for (let i = 0; i < n; i++) {
      await raf();
      await new Promise((resolve) => setTimeout(resolve, 20));
      const before = Number(document.body.getAttribute('data-updates')) || 0;
      const t0 = performance.now();
      // Cutoffs between 180 and 260 Hz: with a fixed order the whole board is redesigned each time.
      input.value = String(180 + 2 * i);
      input.dispatchEvent(new Event('input', { bubbles: true }));
      while ((Number(document.body.getAttribute('data-updates')) || 0) <= before) await raf();
      await raf();
      await raf();
      const shown = performance.now() - t0;
      const attr = (k) => Number(document.body.getAttribute('data-' + k + '-ms'));
      out.push({ edit: attr('edit'), frame: attr('update'), shown, evaluate: attr('evaluate'), render: attr('render'), draw: attr('draw') });
    }
    return out;
  }, N_EDITS);
  const column = (key) => timings.map((t) => t[key]);
  results.frame_parts_median_ms = {};
  for (const key of ['evaluate', 'render', 'draw']) results.frame_parts_median_ms[key] = median(column(key));
  results.edit_to_redraw_ms = { median: median(column('edit')), p90: percentile(column('edit'), 90) };
  results.work_in_frame_ms = { median: median(column('frame')), p90: percentile(column('frame'), 90) };
  results.edit_to_frame_shown_ms = { median: median(column('shown')), p90: percentile(column('shown'), 90) };
  results.canvases_redrawn_per_edit = await page.locator('canvas').count();
  // Where an evaluation's time goes, median of 15 runs after the edits warmed the engine up.
  results.evaluate_steps_ms = await page.evaluate((link) => {
    const runs = [];
    for (let i = 0; i < 15; i++) runs.push(wasm_bindgen.profile_evaluate(link));
    const out = {};
    runs[0].forEach((lap, k) => {
      const values = runs.map((r) => r[k].ms).sort((a, b) => a - b);
      out[lap.step] = Number(values[Math.floor(values.length / 2)].toFixed(2));
    });
    return out;
  }, LINK);

  await page.fill('input[name="runs"]', '10000');
  await page.waitForFunction(() => /runs=10000/.test(window.location.search));
  await page.evaluate(() => {
    window.__gaps = [];
    let last = performance.now();
    const tick = (now) => {
      window.__gaps.push(now - last);
      last = now;
      if (!window.__stopGaps) requestAnimationFrame(tick);
    };
    requestAnimationFrame(tick);
  });
  const done = await page.getAttribute('body', 'data-study-done');
  await page.click('#study-run');
  await h.waitForStudy(page, done);
  await page.evaluate(() => { window.__stopGaps = true; });
  const gaps = await page.evaluate(() => window.__gaps);
  results.study_10000_runs_ms = Number(await page.getAttribute('body', 'data-study-ms'));
  results.study_frame_gap_ms = { max: Math.max(...gaps), p99: percentile(gaps, 99), frames: gaps.length };
  results.study_status = await page.textContent('#study-status');
  // The study kernel alone in wasm, as the native criterion benchmark `montecarlo_kernel`
  // times it (the same board, grid and parts: src/wasm.rs bench_study_kernel): fresh studies of
  // KERNEL_RUNS runs, each timed over one step. The first repeats run before V8 has optimised the
  // kernel; the figure is the median of the rest.
  const kernel = await page.evaluate(([runs, repeats]) => wasm_bindgen.bench_study_kernel(runs, repeats), [KERNEL_RUNS, KERNEL_REPEATS]);
  const perS = (ms) => (kernel.runs * kernel.stages * kernel.points) / (ms / 1000);
  results.wasm_study_kernel = {
    stage_evals_per_s: Number(perS(median(kernel.ms.slice(KERNEL_WARMUP))).toPrecision(3)),
    first_step_per_s: Number(perS(kernel.ms[0]).toPrecision(3)),
    runs: kernel.runs, stages: kernel.stages, points: kernel.points,
    step_ms: kernel.ms.map((ms) => Number(ms.toFixed(1))),
  };
  await context.close();
  await browser.close();

  const pkg = path.join(h.ROOT, 'target', 'wasm-pkg');
  const wasmFile = ['rolloff_opt.wasm', 'rolloff_bg.wasm'].map((f) => path.join(pkg, f)).find((f) => fs.existsSync(f));
  if (wasmFile) {
    const bytes = fs.readFileSync(wasmFile);
    results.wasm_bytes = bytes.length;
    results.wasm_gzip_bytes = zlib.gzipSync(bytes, { level: 9 }).length;
    results.wasm_file = path.relative(h.ROOT, wasmFile);
  }
  results.page_script_bytes = fs.statSync(path.join(h.WWW, 'rolloff-wasm.js')).size;
  if (process.env.ROLLOFF_BENCH_NATIVE === '1') {
    // The native figure in the same minutes: criterion's throughput of the same step(2000), its
    // median estimate (the middle of the three 'thrpt' values), in elements = stage-evaluations/s.
    const out = execFileSync('cargo', ['bench', '--bench', 'montecarlo', '--', 'montecarlo_kernel'], { cwd: h.ROOT, encoding: 'utf8', stdio: ['ignore', 'pipe', 'inherit'] });
    const m = /thrpt:\s*\[[^\]]*?\s([\d.]+)\s*([KMG]?)elem\/s\s+[\d.]+\s*[KMG]?elem\/s\]/.exec(out);
    if (m) {
      const native = Number(m[1]) * { '': 1, K: 1e3, M: 1e6, G: 1e9 }[m[2]];
      results.native_study_kernel_stage_evals_per_s = Number(native.toPrecision(3));
      results.wasm_over_native = Number((results.wasm_study_kernel.stage_evals_per_s / native).toFixed(2));
    }
  }
  console.log(JSON.stringify(results, null, 2));
}

main().catch((error) => {
  console.error(error);
  process.exit(1);
});

// Acceptance tests of the page, driven as a user would: headless Debian Chromium opens
// www/index.html from file:// with a demo link. References come from outside the page: the
// `rolloff` command line built from the same core (same link → same numbers and same bytes).
'use strict';

const { test, before, after } = require('node:test');
const assert = require('node:assert/strict');
const fs = require('node:fs');
const path = require('node:path');
const h = require('./helpers');

// The geophone demo of the README: an anti-alias low-pass ahead of a 2 kS/s 24-bit converter.
const DEMO = 'v=1&title=Geophone+front+end&fsample=2k&adcbits=24&fsignal=200&family=butterworth&topo=mfb';
// A second demo with gain and Sallen-Key stages (the strain-gauge band limit).
const STRAIN = 'v=1&title=Strain+gauge+band+limit&resp=lp&family=bessel&order=4&fc=10&gain=20';

let browser;
const allErrors = [];
const allForeign = [];

before(async () => {
  browser = await h.launch();
  fs.mkdirSync(h.OUT, { recursive: true });
});

after(async () => {
  if (browser) await browser.close();
});

async function open(query, options) {
  const opened = await h.openPage(browser, query, options);
  opened.close = async () => {
    allErrors.push(...opened.log.errors);
    allForeign.push(...h.foreignRequests(opened.log));
    await opened.context.close();
  };
  return opened;
}

function pageQuery(page) {
  return page.evaluate(() => window.location.search.slice(1));
}

/* The stage cards as the user reads them. */
async function readStages(page) {
  return page.$$eval('#stage-cards .card', (cards) => cards.map((card) => {
    const rows = {};
    card.querySelectorAll('table.targets tr').forEach((tr, i) => {
      if (i === 0) return;
      const cells = tr.children;
      rows[cells[0].textContent] = { target: cells[1].textContent, achieved: cells[2].textContent };
    });
    const parts = Array.from(card.querySelectorAll('table.parts tr[data-ref]')).map((tr) => ({
      ref: tr.getAttribute('data-ref'),
      value: tr.querySelector('input').value,
    }));
    return { rows, parts };
  }));
}

function near(actual, expected, relative, what) {
  assert.ok(Number.isFinite(actual), `${what}: the page shows no number`);
  const error = Math.abs(actual - expected) / Math.abs(expected);
  assert.ok(error <= relative, `${what}: page ${actual}, command line ${expected} (relative ${error})`);
}

test('the stage table shows the f0, Q and part values of `rolloff design --format json`', async () => {
  const { page, close } = await open(DEMO);
  const query = await pageQuery(page);
  const json = JSON.parse(h.cli(['design', query, '--format', 'json']));
  const stages = await readStages(page);
  assert.equal(stages.length, json.stages.length, 'one card per stage');
  stages.forEach((card, i) => {
    const ref = json.stages[i];
    // The page writes four significant digits: agreement to 5e-4 relative is all it can show.
    near(h.parseEng(card.rows.f0.target), ref.f0_hz, 5e-4, `stage ${i + 1} target f0`);
    near(h.parseEng(card.rows.f0.achieved), ref.achieved.f0_hz, 5e-4, `stage ${i + 1} achieved f0`);
    if (ref.q !== null) {
      near(Number(card.rows.Q.target), ref.q, 5e-4, `stage ${i + 1} target Q`);
      near(Number(card.rows.Q.achieved), ref.achieved.q, 5e-4, `stage ${i + 1} achieved Q`);
    } else {
      assert.equal(card.rows.Q, undefined, `stage ${i + 1} is first order: no Q row`);
    }
    const expected = ref.parts.filter((p) => p.kind !== 'opamp');
    assert.deepEqual(card.parts.map((p) => p.ref), expected.map((p) => p.ref), `stage ${i + 1} part refs`);
    card.parts.forEach((part, k) => near(h.parseEng(part.value), expected[k].value, 5e-4, `${part.ref} value`));
  });
  await close();
});

test('typing a new cutoff redraws every canvas and changes the link in the address bar', async () => {
  const { page, close } = await open(STRAIN);
  const firstStudy = await h.waitForStudy(page, null);
  const before = await h.canvasPixels(page);
  const linkBefore = await pageQuery(page);
  await page.fill('input[name="fc"]', '15');
  await h.waitForStudy(page, firstStudy);
  const after = await h.canvasPixels(page);
  const linkAfter = await pageQuery(page);
  assert.notEqual(linkAfter, linkBefore, 'the address bar follows the edit');
  assert.match(linkAfter, /(^|&)fc=15(&|$)/, 'the link carries the new cutoff');
  const names = Object.keys(before);
  assert.ok(names.length >= 12, `expected every plot, thumbnail and schematic, found ${names.length}`);
  // The passband gain of this board is set by a resistor ratio, which the cutoff does not
  // change: when the command line's study of both links gives the same gain histogram, the
  // page's gain histogram must stay as it was (and must change otherwise).
  const gainOf = (query) => JSON.stringify(JSON.parse(h.cli(['spread', query, '--format', 'json'])).passband_gain_db.histogram);
  const sameGain = gainOf(linkBefore) === gainOf(linkAfter);
  const gainCanvas = names.filter((name) => name.startsWith('hist-gain#'));
  assert.equal(gainCanvas.length, 1, 'one gain histogram');
  // A gain histogram the same to the JSON's nine digits may still move by a pixel's
  // antialiasing (the runs' gains differ in their last bits), so it is only required to change
  // when the command line's histograms differ.
  const changed = names.filter((name) => before[name] !== after[name]);
  const expected = sameGain ? names.filter((name) => !gainCanvas.includes(name)) : names;
  assert.deepEqual(changed.filter((name) => expected.includes(name)), expected,
    'every canvas whose figure changed shows new pixels');
  await close();
});

test('reloading the page restores the same design', async () => {
  const { page, close } = await open(STRAIN);
  await page.fill('input[name="gain"]', '14');
  await page.locator('#stage-cards .card').first().locator('input').first().fill('12k');
  await page.waitForFunction(() => /gain=14/.test(window.location.search) && /set=/.test(window.location.search));
  const summary = await page.textContent('#summary');
  const stages = await readStages(page);
  const link = await pageQuery(page);
  await page.reload();
  await page.waitForSelector('body[data-ready="1"]');
  assert.equal(await pageQuery(page), link, 'the link survives the reload');
  assert.equal(await page.inputValue('input[name="gain"]'), '14');
  assert.deepEqual(await readStages(page), stages, 'the same stages and parts');
  assert.equal((await page.textContent('#summary')).split(' · yield')[0], summary.split(' · yield')[0]);
  await close();
});

test('an invalid field shows its message and the plots keep the last good design', async () => {
  const { page, close } = await open(STRAIN);
  await h.waitForStudy(page, null);
  const before = await h.canvasPixels(page);
  await page.fill('input[name="fc"]', '12 bananas');
  const message = page.locator('label.field.bad:has(input[name="fc"]) .msg');
  await message.waitFor();
  assert.match(await message.textContent(), /fc|number|12 bananas/i);
  assert.equal(await page.getAttribute('input[name="fc"]', 'aria-invalid'), 'true');
  assert.ok(await page.evaluate(() => document.body.classList.contains('stale')), 'the plots are marked stale');
  const after = await h.canvasPixels(page);
  assert.deepEqual(after, before, 'the last good design stays drawn');
  await page.fill('input[name="fc"]', '12');
  await page.waitForFunction(() => !document.body.classList.contains('stale'));
  assert.equal(await page.locator('.field.bad').count(), 0, 'the message goes once the field is fixed');
  await close();
});

async function download(page, kind) {
  await page.click('#save-menu summary');
  const [file] = await Promise.all([
    page.waitForEvent('download'),
    page.click(`[data-export="${kind}"]`),
  ]);
  const target = path.join(h.OUT, `download-${kind}`);
  await file.saveAs(target);
  return fs.readFileSync(target, 'utf8');
}

test('the parts list download is byte for byte `rolloff design --format bom`', async () => {
  const { page, close } = await open(DEMO);
  const query = await pageQuery(page);
  assert.equal(await download(page, 'bom'), h.cli(['design', query, '--format', 'bom']));
  await close();
});

/* Compares two JSON values: same shape, same keys in the same order, equal strings, booleans
 * and nulls, and numbers equal to 1e-9 relative (or 1e-12 absolute near zero). */
function sameJson(a, b, where) {
  if (typeof a === 'number' && typeof b === 'number') {
    const ok = a === b || Math.abs(a - b) <= 1e-9 * Math.max(Math.abs(a), Math.abs(b)) || Math.abs(a - b) <= 1e-12;
    assert.ok(ok, `${where}: page ${a}, command line ${b}`);
    return;
  }
  assert.equal(typeof a, typeof b, `${where}: types differ`);
  if (a === null || typeof a !== 'object') {
    assert.equal(a, b, where);
    return;
  }
  assert.equal(Array.isArray(a), Array.isArray(b), `${where}: array against object`);
  const keysA = Object.keys(a);
  assert.deepEqual(keysA, Object.keys(b), `${where}: keys differ`);
  keysA.forEach((key) => sameJson(a[key], b[key], `${where}.${key}`));
}

test('the SPICE netlist download is byte for byte the command line output', async () => {
  const { page, close } = await open(STRAIN + '&set=R1:12k');
  const query = await pageQuery(page);
  assert.equal(await download(page, 'spice'), h.cli(['design', query, '--format', 'spice']));
  await close();
});

test('the design JSON download is the command line output, byte for byte', async () => {
  // The JSON rounds every number to 9 significant digits (export::json::JSON_DIGITS), so the
  // last-bit differences between the wasm and native maths libraries do not reach the text.
  const { page, close } = await open(STRAIN + '&set=R1:12k');
  const query = await pageQuery(page);
  const fromPage = await download(page, 'json');
  const fromCli = h.cli(['design', query, '--format', 'json']);
  sameJson(JSON.parse(fromPage), JSON.parse(fromCli), 'design');
  assert.equal(fromPage, fromCli, 'the same bytes');
  await close();
});

test('a link with markup or script in every key executes nothing and inserts no element', async () => {
  const keys = ['resp', 'family', 'order', 'fc', 'bw', 'ripple', 'passedge', 'passloss', 'stopedge', 'stopdepth',
    'gain', 'topo', 'rser', 'cser', 'rtol', 'ctol', 'gbw', 'a0', 'rout', 'vnoise', 'inoise', 'slew',
    'rlevel', 'cratio', 'rratio', 'round', 'set', 'tolset', 'stageorder', 'runs', 'seed', 'dist',
    'sigmas', 'vin', 'swing', 'drift', 'noiseband', 'span', 'fsample', 'adcbits', 'fsignal', 'title'];
  const payloads = [
    '<img src=x onerror="window.__pwned=1">',
    '<script>window.__pwned=1</script>',
    '"><svg onload=window.__pwned=1>',
    'javascript:window.__pwned=1',
  ];
  // `v` stays valid here (a bad `v` refuses the whole link; checked at the end).
  const params = new URLSearchParams();
  params.append('v', '2');
  keys.forEach((key, i) => params.append(key, payloads[i % payloads.length]));
  params.append('<b onmouseover=window.__pwned=1>key</b>', payloads[0]);
  // Record every element added to the document from the very start.
  // Record every element added to the document from the very start (the parser's too).
  const initScript = () => {
    window.__added = [];
    new MutationObserver((records) => {
      records.forEach((r) => r.addedNodes.forEach((n) => {
        if (n.nodeType === 1) window.__added.push(n.tagName + ' ' + (n.outerHTML || '').slice(0, 80));
      }));
    }).observe(document, { childList: true, subtree: true });
  };
  const { page, close } = await open(params.toString(), { initScript });
  await page.waitForTimeout(500);
  assert.equal(await page.evaluate(() => window.__pwned), undefined, 'no payload ran');
  const added = await page.evaluate(() => window.__added);
  // The page adds list items, table rows, cards and canvases; never a script, image, svg, frame,
  // link, style or bold element. The markup's own stylesheet, skip link and scripts are the
  // only such elements, inserted by the parser.
  assert.ok(added.some((line) => /^LI /.test(line)), 'the observer saw the page list the ignored keys');
  const own = [
    'LINK <link rel="icon" href="data:,">',
    'LINK <link rel="stylesheet" href="style.css">',
    'A <a class="skip" href="#plots">Skip to the plots</a>',
  ].concat(h.SCRIPTS.map((name) => `SCRIPT <script src="${name}"></script>`));
  const dangerous = added.filter((line) => /^(SCRIPT|IMG|SVG|svg|IFRAME|OBJECT|EMBED|B|A|STYLE|LINK) /.test(line) && !own.includes(line));
  assert.deepEqual(dangerous, [], 'no element from the link was inserted');
  const attributes = await page.evaluate(() => Array.from(document.querySelectorAll('*'))
    .flatMap((el) => Array.from(el.attributes)
      .filter((a) => /^on/i.test(a.name) || (/pwned/.test(a.value) && a.name !== 'value'))
      .map((a) => el.tagName + ' ' + a.name + '=' + a.value)));
  assert.deepEqual(attributes, [], 'no event-handler attribute and no link text in any attribute');
  const notice = await page.textContent('#notice');
  assert.ok(notice.includes('<b onmouseover=window.__pwned=1>key</b>'), 'the unknown key is listed as text');
  assert.ok(await page.isVisible('#notice'), 'the ignored keys are listed');
  assert.equal(await page.textContent('#design-title'), payloads[(keys.length - 1) % payloads.length], 'the title is shown as text');
  await close();

  // Markup in `v` refuses the link as a whole: nothing runs, the refusal is listed as text.
  const refused = await open('v=' + encodeURIComponent(payloads[0]) + '&title=' + encodeURIComponent(payloads[1]));
  assert.equal(await refused.page.evaluate(() => window.__pwned), undefined, 'no payload ran');
  assert.match(await refused.page.textContent('#notice'), /not opened/);
  assert.ok((await refused.page.textContent('#notice')).includes(payloads[0]), 'the refused value is shown as text');
  assert.equal(await refused.page.locator('img, svg').count(), 0);
  await refused.close();
});

test('a saved design JSON opens again as the same board, and the shown plot saves as PNG', async () => {
  const { page, close } = await open(STRAIN + '&set=R1:12k&topo=mfb');
  const saved = await download(page, 'json');
  const stages = await readStages(page);
  const file = path.join(h.OUT, 'saved-design.json');
  fs.writeFileSync(file, saved);
  await page.goto(h.PAGE_URL + '?v=1');
  await page.waitForSelector('body[data-ready="1"]');
  assert.notDeepEqual(await readStages(page), stages, 'a different design before the import');
  await page.setInputFiles('#import-json', file);
  await page.waitForFunction(() => /set=/.test(window.location.search));
  assert.deepEqual(await readStages(page), stages, 'the imported board has the saved parts');
  await page.click('#save-menu summary');
  const [png] = await Promise.all([page.waitForEvent('download'), page.click('#save-png')]);
  const target = path.join(h.OUT, 'plot.png');
  await png.saveAs(target);
  const bytes = fs.readFileSync(target);
  // PNG signature (ISO/IEC 15948): 89 50 4E 47 0D 0A 1A 0A.
  assert.deepEqual([...bytes.subarray(0, 8)], [0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a]);
  await close();
});

test('the plots are reachable by keyboard and read out under the crosshair', async () => {
  const { page, close } = await open(STRAIN);
  await page.focus('#plot-main');
  await page.keyboard.press('ArrowRight');
  const readout = page.locator('figure.main-plot .readout');
  await readout.waitFor({ state: 'visible' });
  const text = await readout.textContent();
  assert.match(text, /Hz/, 'the readout names the frequency');
  assert.match(text, /built: .*dB/, 'and the built gain there');
  // The thumbnails are buttons: Enter on one brings its plot into the large slot.
  await page.focus('.thumb[data-plot="step"]');
  await page.keyboard.press('Enter');
  assert.equal(await page.getAttribute('.thumb[data-plot="step"]', 'aria-pressed'), 'true');
  const outline = await page.evaluate(() => getComputedStyle(document.activeElement).outlineStyle);
  assert.notEqual(outline, 'none', 'focus is visible');
  await close();
});

test('text contrast is at least 4.5:1 in light and dark (WCAG 2 AA for normal text)', async () => {
  // WCAG 2.x relative luminance and contrast ratio (W3C Recommendation), computed from the
  // colours the browser resolves for the page's text roles against the surface under them.
  for (const scheme of ['light', 'dark']) {
    const { page, close } = await open(STRAIN, { colorScheme: scheme });
    const pairs = await page.evaluate(() => {
      const rgb = (text) => (text.match(/[\d.]+/g) || []).slice(0, 3).map(Number);
      const surface = (el) => {
        for (let node = el; node; node = node.parentElement) {
          const bg = getComputedStyle(node).backgroundColor;
          const alpha = (bg.match(/[\d.]+/g) || [])[3];
          if (bg && bg !== 'transparent' && alpha !== '0') return rgb(bg);
        }
        return [255, 255, 255];
      };
      const roles = ['#summary', '.requirement h2', '.field .label', '.unit', '.hint', 'input[name="fc"]',
        '.card th', '.card td', '.thumb span', '#figures', '.caution', '.segmented input:checked + span'];
      return roles.map((selector) => {
        const el = document.querySelector(selector);
        return el ? { selector, fg: rgb(getComputedStyle(el).color), bg: surface(el) } : { selector, missing: true };
      });
    });
    const luminance = ([r, g, b]) => {
      const lin = (c) => { const v = c / 255; return v <= 0.03928 ? v / 12.92 : ((v + 0.055) / 1.055) ** 2.4; };
      return 0.2126 * lin(r) + 0.7152 * lin(g) + 0.0722 * lin(b);
    };
    for (const pair of pairs) {
      assert.ok(!pair.missing, `${scheme}: ${pair.selector} is on the page`);
      const [a, b] = [luminance(pair.fg), luminance(pair.bg)].sort((x, y) => y - x);
      const ratio = (a + 0.05) / (b + 0.05);
      assert.ok(ratio >= 4.5, `${scheme}: ${pair.selector} contrast ${ratio.toFixed(2)}:1`);
    }
    await close();
  }
});

test('screenshots at 1366×768 in light and dark are written for review', async () => {
  for (const scheme of ['light', 'dark']) {
    const { page, close } = await open(DEMO, { colorScheme: scheme });
    await h.waitForStudy(page, null);
    const file = path.join(h.OUT, `page-${scheme}.png`);
    await page.screenshot({ path: file });
    await page.screenshot({ path: path.join(h.OUT, `page-${scheme}-full.png`), fullPage: true });
    const overflow = await page.evaluate(() => document.documentElement.scrollWidth - window.innerWidth);
    assert.ok(overflow <= 0, `no horizontal scrolling at 1366 px (overflow ${overflow} px)`);
    assert.ok(fs.statSync(file).size > 20000, 'the screenshot has content');
    await close();
  }
});

test('no request left the page and nothing was logged as an error', () => {
  assert.deepEqual(allForeign, [], 'only the page\'s own files were requested');
  assert.deepEqual(allErrors, [], 'no console error and no page error');
});

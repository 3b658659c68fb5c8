// Links as a person uses them: opened from the address bar, kept through edits, refused when
// they come from a newer Rolloff, walked with Back, and kept through a reload. Headless Debian
// Chromium opens www/index.html from file://; the reference for every design is the `rolloff`
// command line built from the same core (same link → same design and same study).
'use strict';

const { test, before, after } = require('node:test');
const assert = require('node:assert/strict');
const fs = require('node:fs');
const path = require('node:path');
const h = require('./helpers');

const STRAIN = 'v=2&title=Strain+gauge+band+limit&resp=lp&family=bessel&order=4&fc=10&gain=20';

let browser;
const allErrors = [];
before(async () => {
  browser = await h.launch();
  fs.mkdirSync(h.OUT, { recursive: true });
});
after(async () => { if (browser) await browser.close(); });

async function open(query) {
  const opened = await h.openPage(browser, query);
  opened.close = async () => {
    allErrors.push(...opened.log.errors, ...h.foreignRequests(opened.log).map((u) => `request: ${u}`));
    await opened.context.close();
  };
  return opened;
}
const pageQuery = (page) => page.evaluate(() => window.location.search.slice(1));
const hasKey = (query, key, value) => new URLSearchParams(query).get(key) === value;

/* Every field of the form, as the user sees it (radios: the checked one); with `markup`, what
 * the page's markup puts in each field before any link is read. */
function readFields(page, markup) {
  return page.evaluate((markup) => {
    const out = {};
    Array.from(document.querySelector('#req').elements).filter((el) => el.name).forEach((el) => {
      if (el.type === 'radio') {
        if (markup ? el.defaultChecked : el.checked) out[el.name] = el.value;
      } else if (el.tagName === 'SELECT') {
        const chosen = Array.from(el.options).find((o) => (markup ? o.defaultSelected : o.selected)) || el.options[0];
        out[el.name] = chosen.value;
      } else out[el.name] = markup ? el.defaultValue : el.value;
    });
    return out;
  }, !!markup);
}
/* The stage cards: each part and the value shown for it. */
function readParts(page) {
  return page.$$eval('#stage-cards table.parts tr[data-ref]', (rows) => rows.map((tr) => tr.getAttribute('data-ref') + '=' + tr.querySelector('input').value));
}

test('a version-1 link with a fixed order and limits opens as its 1 kHz design and keeps fc=1k', async () => {
  const link = 'v=1&order=6&fc=1k&fpass=500&fstop=5k&astop=40';
  const { page, close } = await open(link);
  const json = JSON.parse(h.cli(['design', link, '--format', 'json']));
  // The command line's reading of the link (the reference): a sixth-order design at 1 kHz.
  assert.equal(json.fc_hz, 1000, 'the command line reads a 1 kHz cutoff');
  const query = await pageQuery(page);
  assert.ok(hasKey(query, 'fc', '1k'), `the address keeps fc=1k: ${query}`);
  assert.equal('?' + query, json.link, 'the address is the command line\'s link for the design');
  assert.equal(await page.inputValue('input[name="fc"]'), '1k', 'the cutoff field shows 1k');
  assert.equal(await page.inputValue('input[name="order"]'), '6', 'the order field shows 6');
  // The stages are the command line's: the same count and the same f0 targets.
  const f0 = await page.$$eval('#stage-cards .card table.targets tr', (rows) => rows
    .filter((tr) => tr.children[0].textContent === 'f0').map((tr) => tr.children[1].textContent));
  assert.equal(f0.length, json.stages.length, 'one card per stage');
  f0.forEach((text, i) => {
    const rel = Math.abs(h.parseEng(text) - json.stages[i].f0_hz) / json.stages[i].f0_hz;
    assert.ok(rel <= 5e-4, `stage ${i + 1} f0: page ${text}, command line ${json.stages[i].f0_hz}`);
  });
  await close();
});

test('a tolset link keeps tolset through an edit, and the page\'s yield is `rolloff spread`', async () => {
  const link = 'v=2&resp=lp&family=butterworth&order=4&fc=1k&passedge=800&passloss=1&stopedge=3k&stopdepth=30&runs=400&seed=3&tolset=C1:50,C2:20';
  const { page, close } = await open(link);
  const first = await h.waitForStudy(page, null);
  await page.fill('input[name="gain"]', '6');
  await page.waitForFunction(() => /gain=6(&|$)/.test(window.location.search));
  await h.waitForStudy(page, first);
  const query = await pageQuery(page);
  assert.ok(hasKey(query, 'tolset', 'C1:50,C2:20'), `tolset stays in the address after the edit: ${query}`);
  const spread = JSON.parse(h.cli(['spread', query, '--format', 'json']));
  const without = new URLSearchParams(query);
  without.delete('tolset');
  const plain = JSON.parse(h.cli(['spread', without.toString(), '--format', 'json']));
  // The wide capacitors must matter, or the check below could not tell a dropped tolset.
  assert.notEqual(spread.yield, plain.yield, 'the command line\'s yield depends on tolset for this link');
  const status = await page.textContent('#study-status');
  const y = /yield ([\d.]+) %/.exec(status);
  assert.ok(y, `the page shows a yield: ${status}`);
  assert.equal(Number(y[1]).toFixed(1), (spread.yield * 100).toFixed(1), 'page yield = rolloff spread (one decimal)');
  // The parts table states each part's own tolerance, as the parts list does.
  const bom = h.cli(['design', query, '--format', 'bom']).trim().split('\n');
  const col = bom[0].split(',').indexOf('tolerance_pct');
  assert.ok(col >= 0, `the parts list has tolerance_pct: ${bom[0]}`);
  for (const ref of ['C1', 'C2', 'C3', 'R1']) {
    const row = bom.find((line) => line.startsWith(ref + ','));
    const shown = await page.textContent(`tr[data-ref="${ref}"] td.tol`);
    assert.equal(shown, `±${row.split(',')[col]} %`, `${ref}'s tolerance on the page = the parts list`);
  }
  await close();
});

test('a v=3 link changes nothing and says why', async () => {
  const link = 'v=3&order=6&fc=2k&gain=12';
  const { page, close } = await open(link);
  // The command line refuses the same link (the reference for the reason).
  assert.throws(() => h.cli(['design', link]), /newer/, 'the command line refuses it');
  assert.equal(await pageQuery(page), link, 'the address is left as it was');
  assert.deepEqual(await readFields(page), await readFields(page, true), 'the form is not filled from it: each field holds what the markup put there');
  assert.equal(await page.locator('#stage-cards .card').count(), 0, 'no design is drawn from it');
  assert.ok(await page.isVisible('#notice'), 'the notice is shown');
  const notice = await page.textContent('#notice');
  assert.match(notice, /newer/, 'the notice says the link is from a newer Rolloff');
  assert.match(notice, /not opened/, 'and that it was not opened');
  assert.match(await page.textContent('#summary'), /not opened/, 'the summary does not claim to be loading');
  await close();
});

test('a design JSON of format 3 changes nothing on Open…', async () => {
  const { page, close } = await open(STRAIN + '&set=R1:12k');
  await page.click('#save-menu summary');
  const [saved] = await Promise.all([page.waitForEvent('download'), page.click('[data-export="json"]')]);
  const json = JSON.parse(fs.readFileSync(await saved.path(), 'utf8'));
  assert.equal(json.format, 2, 'the page saves format 2');
  json.format = 3;
  json.link = '?v=2&resp=hp&order=2&fc=5k';
  const file = path.join(h.OUT, 'format-3.json');
  fs.writeFileSync(file, JSON.stringify(json));
  const query = await pageQuery(page);
  const fields = await readFields(page);
  const parts = await readParts(page);
  await page.setInputFiles('#import-json', file);
  await page.locator('#notice').waitFor({ state: 'visible' });
  assert.match(await page.textContent('#notice'), /not opened/, 'the notice says the file was not opened');
  assert.match(await page.textContent('#notice'), /3/, 'and names its format');
  assert.equal(await pageQuery(page), query, 'the address is unchanged');
  assert.deepEqual(await readFields(page), fields, 'the form is unchanged');
  assert.deepEqual(await readParts(page), parts, 'the design is unchanged');
  await close();
});

test('choosing an Example then pressing Back returns to the previous design, typed-over part included', async () => {
  const { page, close } = await open(STRAIN);
  // Two quick edits, the second a part typed over, then at once an example: done inside the page,
  // in one task, so the typed-over part is still waiting for its animation frame when the
  // example opens (on a busy page the pick can reach it before that frame).
  const example = await page.$eval('#example', (select) => Array.from(select.options).find((o) => /Geophone/.test(o.textContent)).value);
  const [fields, parts] = await page.evaluate((example) => {
    const type = (input, text) => {
      input.focus();
      input.value = text;
      input.dispatchEvent(new InputEvent('input', { bubbles: true, inputType: 'insertText', data: text }));
    };
    type(document.querySelector('input[name="gain"]'), '14');
    type(document.querySelector('#stage-cards tr[data-ref="R1"] input'), '12k');
    // What the user sees just before picking: the edits in their fields (read as readFields and
    // readParts do).
    const fields = {};
    Array.from(document.querySelector('#req').elements).filter((el) => el.name).forEach((el) => {
      if (el.type === 'radio') { if (el.checked) fields[el.name] = el.value; } else fields[el.name] = el.value;
    });
    const parts = Array.from(document.querySelectorAll('#stage-cards table.parts tr[data-ref]'))
      .map((tr) => tr.getAttribute('data-ref') + '=' + tr.querySelector('input').value);
    const select = document.querySelector('#example');
    select.value = example;
    select.dispatchEvent(new Event('change', { bubbles: true }));
    return [fields, parts];
  }, example);
  assert.ok(parts.includes('R1=12k'), 'R1 was typed over before the example');
  await page.waitForFunction(() => /Geophone/.test(window.location.search));
  assert.notDeepEqual(await readParts(page), parts, 'the example is another design');
  await page.goBack({ waitUntil: 'commit' });
  await page.waitForFunction(() => !/Geophone/.test(window.location.search));
  const query = await pageQuery(page);
  assert.ok(hasKey(query, 'gain', '14'), `the address has the edit: ${query}`);
  assert.ok(hasKey(query, 'set', 'R1:12k'), `and the typed-over part: ${query}`);
  assert.deepEqual(await readFields(page), fields, 'the form is as it was');
  assert.deepEqual(await readParts(page), parts, 'the parts are as they were, R1 = 12k');
  await close();
});

/* Types into each field in turn as the keyboard does (the value changes, then an input event),
 * then asks for a reload `afterMs` later. Done inside the page, so nothing of the test's own
 * round trips comes between the edits and the reload: 0 ms is a reload in the same task as the
 * edits (the second edit is still waiting for its animation frame), 20 ms a quick Ctrl+R. */
async function editThenReload(page, edits, afterMs) {
  await page.evaluate(({ edits, afterMs }) => {
    edits.forEach(([name, text]) => {
      const input = document.querySelector(`input[name="${name}"]`);
      input.focus();
      input.value = text;
      input.dispatchEvent(new InputEvent('input', { bubbles: true, inputType: 'insertText', data: text }));
    });
    if (afterMs === 0) location.reload(); else setTimeout(() => location.reload(), afterMs);
  }, { edits, afterMs }).catch(() => null);   // the reload may cut the evaluation short
  await page.waitForFunction(() => performance.getEntriesByType('navigation')[0].type === 'reload'
    && document.body.getAttribute('data-ready') === '1', null, { timeout: 15000 });
}

test('an edit followed at once by a reload keeps the edit', async () => {
  for (const afterMs of [0, 20]) {
    const { page, close } = await open(STRAIN);
    await editThenReload(page, [['gain', '14'], ['fc', '15']], afterMs);
    assert.equal(await page.inputValue('input[name="fc"]'), '15', `reload ${afterMs} ms after: the last edit survived`);
    assert.equal(await page.inputValue('input[name="gain"]'), '14', `reload ${afterMs} ms after: and the edit before it`);
    const query = await pageQuery(page);
    assert.ok(hasKey(query, 'fc', '15') && hasKey(query, 'gain', '14'), `the address holds both: ${query}`);
    await close();
  }
});

test('no request left the page and nothing was logged as an error', () => {
  assert.deepEqual(allErrors, []);
});

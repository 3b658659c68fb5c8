// Accessibility of the page, checked as a keyboard and screen-reader user meets it: headless
// Debian Chromium opens www/index.html from file://. The expectations are those of WCAG 2.2
// (W3C Recommendation): 2.4.7 focus visible, 2.1.2 no keyboard trap / 1.3.1 and the WAI-ARIA
// Authoring Practices disclosure pattern (Escape closes and focus returns to the trigger),
// 4.1.3 status messages, 2.4.6 labels that describe (two fields may not share one name), and
// the printed report carrying the design's link (the link holds the whole design).
'use strict';

const { test, before, after } = require('node:test');
const assert = require('node:assert/strict');
const h = require('./helpers');

const STRAIN = 'v=2&title=Strain+gauge+band+limit&resp=lp&family=bessel&order=4&fc=10&gain=20';

let browser;
const allErrors = [];
before(async () => { browser = await h.launch(); });
after(async () => { if (browser) await browser.close(); });

async function open(query) {
  const opened = await h.openPage(browser, query);
  opened.close = async () => {
    allErrors.push(...opened.log.errors, ...h.foreignRequests(opened.log).map((u) => `request: ${u}`));
    await opened.context.close();
  };
  return opened;
}

test('Open… shows a visible focus ring when tabbed to', async () => {
  const { page, close } = await open(STRAIN);
  await page.focus('#copy-link');
  // Copy link → Save (its summary) → Open… (the file input behind its label).
  await page.keyboard.press('Tab');
  await page.keyboard.press('Tab');
  assert.equal(await page.evaluate(() => document.activeElement.id), 'import-json', 'Tab reaches Open…');
  const ring = await page.evaluate(() => {
    const style = getComputedStyle(document.querySelector('label[for="import-json"]'));
    return { style: style.outlineStyle, width: parseFloat(style.outlineWidth) };
  });
  assert.notEqual(ring.style, 'none', 'the Open… button draws an outline while its input has focus');
  assert.ok(ring.width >= 2, `the outline is at least 2 px wide (WCAG 2.4.13 focus appearance), got ${ring.width}`);
  await page.keyboard.press('Tab');
  const after = await page.evaluate(() => getComputedStyle(document.querySelector('label[for="import-json"]')).outlineStyle);
  assert.equal(after, 'none', 'the ring goes when focus moves on');
  await close();
});

test('the Save menu closes on Escape and returns focus to its summary', async () => {
  const { page, close } = await open(STRAIN);
  await page.focus('#save-menu summary');
  await page.keyboard.press('Enter');
  assert.equal(await page.evaluate(() => document.querySelector('#save-menu').open), true, 'Enter opens the menu');
  await page.keyboard.press('Tab');
  assert.equal(await page.evaluate(() => document.activeElement.getAttribute('data-export')), 'bom', 'Tab enters the menu');
  await page.keyboard.press('Escape');
  assert.equal(await page.evaluate(() => document.querySelector('#save-menu').open), false, 'Escape closes it');
  assert.equal(await page.evaluate(() => document.activeElement === document.querySelector('#save-menu summary')), true,
    'focus is back on the summary');
  // Escape on the closed menu's summary leaves it closed and keeps the focus.
  await page.keyboard.press('Escape');
  assert.equal(await page.evaluate(() => document.querySelector('#save-menu').open), false);
  await close();
});

test('a field error is linked to its field and announced', async () => {
  const { page, close } = await open(STRAIN);
  await page.fill('input[name="fc"]', '12 bananas');
  await page.waitForSelector('label.field.bad:has(input[name="fc"]) .msg');
  const found = await page.evaluate(() => {
    const input = document.querySelector('input[name="fc"]');
    const ids = (input.getAttribute('aria-describedby') || '').split(/\s+/).filter(Boolean);
    const msg = ids.length ? document.getElementById(ids[0]) : null;
    let live = null;
    for (let node = msg; node; node = node.parentElement) {
      const role = node.getAttribute('role');
      const aria = node.getAttribute('aria-live');
      if (role === 'alert' || role === 'status' || (aria && aria !== 'off')) { live = role || aria; break; }
    }
    return { ids, text: msg ? msg.textContent : null, inField: !!(msg && input.closest('.field').contains(msg)), live };
  });
  assert.equal(found.ids.length, 1, 'aria-describedby names the message');
  assert.ok(found.text && found.text.length > 0, 'the described element holds the message');
  assert.ok(found.inField, 'the message sits beneath its own field');
  assert.ok(found.live, 'the message is in a live region (role alert or aria-live), so it is announced');
  // Playwright's accessibility tree agrees: the field's description is the message.
  const described = await page.getByRole('textbox', { name: /Cutoff/ }).getAttribute('aria-describedby');
  assert.equal(described, found.ids[0]);
  // An edit elsewhere leaves the same complaint in place: the message element stays (a new one
  // would be announced again on every keystroke).
  await page.evaluate((id) => { window.__msg = document.getElementById(id); }, found.ids[0]);
  const updates = await page.evaluate(() => document.body.getAttribute('data-updates'));
  await page.fill('input[name="gain"]', '15');
  await page.waitForFunction((n) => document.body.getAttribute('data-updates') !== n, updates);
  assert.equal(await page.evaluate(() => document.querySelector('input[name="fc"]').getAttribute('aria-describedby')
    && document.getElementById(document.querySelector('input[name="fc"]').getAttribute('aria-describedby')) === window.__msg), true,
    'an unchanged message is not re-announced');
  await close();
});

test('no two controls share an accessible name; the tolerance fields name their part', async () => {
  const { page, close } = await open(STRAIN);
  const resistor = page.getByLabel('Resistor tolerance ± %', { exact: true });
  const capacitor = page.getByLabel('Capacitor tolerance ± %', { exact: true });
  assert.equal(await resistor.count(), 1, 'one field named "Resistor tolerance ± %"');
  assert.equal(await capacitor.count(), 1, 'one field named "Capacitor tolerance ± %"');
  assert.equal(await resistor.getAttribute('name'), 'rtol');
  assert.equal(await capacitor.getAttribute('name'), 'ctol');
  assert.equal(await page.getByLabel('Tolerance ± %', { exact: true }).count(), 0, 'no field keeps the shared name');
  // Every control in the accessibility tree, by role and name.
  const snapshot = await page.locator('body').ariaSnapshot();
  const controls = [];
  for (const line of snapshot.split('\n')) {
    const m = /^\s*- (textbox|combobox|button|checkbox|radio|spinbutton|slider|switch|link) "((?:[^"\\]|\\.)*)"/.exec(line);
    if (m) controls.push(`${m[1]} "${m[2]}"`);
  }
  assert.ok(controls.length >= 40, `the tree lists the form's controls (${controls.length} found)`);
  const names = controls.map((c) => c.replace(/^\S+ /, ''));
  const twice = names.filter((name, i) => names.indexOf(name) !== i);
  assert.deepEqual(twice, [], 'each control has a name of its own');
  await close();
});

test('the printed report carries the design link, equal to the address', async () => {
  const { page, close } = await open(STRAIN);
  assert.equal(await page.isVisible('#print-link'), false, 'on screen the link is only in the address bar');
  await page.fill('input[name="gain"]', '14');
  await page.waitForFunction(() => /gain=14/.test(window.location.search));
  await page.emulateMedia({ media: 'print' });
  assert.equal(await page.isVisible('#print-link'), true, 'the link is printed');
  const shown = await page.textContent('#print-link');
  const href = await page.evaluate(() => window.location.href);
  assert.equal(shown, href, 'the printed link is the address');
  assert.match(shown, /[?&]gain=14(&|$)/, 'and holds the edit');
  await page.emulateMedia({ media: 'screen' });
  await close();
});

test('no request left the page and nothing was logged as an error', () => {
  assert.deepEqual(allErrors, []);
});

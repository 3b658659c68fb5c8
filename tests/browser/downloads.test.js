// The page's three downloads (design JSON, parts list CSV, SPICE netlist) are the command line's
// output for the same link, byte for byte: for every example link (the README's demos and the
// page's Examples menu) and for 260 seeded links over the keys. The page's texts come from the
// wasm exports the Save menu calls (`evaluate`, then `export_text`); the reference is
// `rolloff design LINK --format json|bom|spice` built natively from the same core. Bytes can only
// match if both builds compute every elementary function with the same code (the libm crate,
// `src/fmath.rs`), since glibc and Rust's bundled libm differ in the last bits.
'use strict';

const { test, before, after } = require('node:test');
const assert = require('node:assert/strict');
const fs = require('node:fs');
const path = require('node:path');
const h = require('./helpers');

const KINDS = ['json', 'bom', 'spice'];
const N_FUZZED = 260;
const SEED = 0x5eed_f10a;

let browser;
before(async () => { browser = await h.launch(); });
after(async () => { if (browser) await browser.close(); });

/* The example links: every `?v=…` link in backquotes or single quotes in the README, and every
 * option of the page's Examples menu, read from the files so the test follows them. */
function exampleLinks() {
  const links = new Set();
  const readme = fs.readFileSync(path.join(h.ROOT, 'README.md'), 'utf8');
  for (const match of readme.matchAll(/[`']\?(v=[^`'\s]+)[`']/g)) links.add(match[1]);
  const html = fs.readFileSync(path.join(h.WWW, 'index.html'), 'utf8');
  const menu = /<select id="example">([\s\S]*?)<\/select>/.exec(html);
  assert.ok(menu, 'index.html has the Examples menu');
  for (const match of menu[1].matchAll(/<option value="([^"]+)"/g)) links.add(match[1].replace(/&amp;/g, '&'));
  return Array.from(links);
}

/* A small seeded generator (mulberry32), so the fuzzed links are the same on every run. */
function generator(seed) {
  let state = seed >>> 0;
  const next = () => {
    state = (state + 0x6d2b79f5) >>> 0;
    let t = state;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
  return {
    chance: (p) => next() < p,
    pick: (items) => items[Math.floor(next() * items.length)],
  };
}

/* One link that designs something (mostly): a response and its cutoff or limits, then any of
 * the build, op-amp, rounding, tolerance and override keys with values inside their ranges. */
function fuzzedLink(g) {
  const keys = ['v=2'];
  const add = (key, values) => keys.push(`${key}=${g.pick(values)}`);
  const resp = g.pick(['lp', 'lp', 'hp', 'bp']);
  keys.push(`resp=${resp}`);
  const family = g.pick(['butterworth', 'chebyshev', 'bessel', 'linkwitz-riley', 'critical']);
  keys.push(`family=${family}`);
  // Limits are given for the families that design from them (a Bessel filter reaches a deep
  // stopband only at orders above the largest one designed, so it gets none).
  const byLimits = ['butterworth', 'chebyshev'].includes(family) && g.chance(0.35);
  if (family === 'chebyshev' && !byLimits && g.chance(0.6)) add('ripple', ['0.1', '0.25', '0.5', '1', '2', '3']);
  if (byLimits) {
    if (resp === 'bp') {
      keys.push(g.pick(['passedge=2k,20k&stopedge=400,100k', 'passedge=300,3.4k&stopedge=100,12k',
        'passedge=9k,11k&stopedge=6k,16k']));
    } else if (resp === 'hp') {
      keys.push(g.pick(['passedge=1k&stopedge=250', 'passedge=80&stopedge=30', 'passedge=20k&stopedge=7k']));
    } else {
      keys.push(g.pick(['passedge=1k&stopedge=3k', 'passedge=20k&stopedge=40k', 'passedge=100&stopedge=450',
        'passedge=3.4k&stopedge=8k']));
    }
    add('passloss', ['0.1', '0.5', '1', '3']);
    add('stopdepth', ['20', '30', '40', '50', '60']);
    if (g.chance(0.3)) add('margin', ['split', 'pass', 'stop']);
  } else {
    // A band-pass order counts the poles of the whole filter (even; a Linkwitz-Riley one a
    // multiple of 4); a Linkwitz-Riley low- or high-pass is of even order.
    if (resp === 'bp') add('order', family === 'linkwitz-riley' ? ['4', '8'] : ['2', '4', '6', '8']);
    else add('order', family === 'linkwitz-riley' ? ['2', '4', '6', '8'] : ['1', '2', '3', '4', '5', '6', '7', '8']);
    add('fc', ['0.5', '10', '100', '330', '1k', '2.2k', '10k', '47k', '150k']);
    if (resp === 'bp') add('bw', ['0.2', '10', '50', '300', '1k', '5k']);
  }
  if (g.chance(0.15)) keys.push(g.pick(['fsample=2k&adcbits=24&fsignal=200', 'fsample=48k&adcbits=16&fsignal=20k',
    'fsample=1M&adcbits=12&fsignal=100k']));
  if (g.chance(0.5)) add('gain', ['-20', '-6', '0', '3', '6', '20', '40']);
  if (g.chance(0.5)) add('topo', ['sk', 'mfb']);
  if (g.chance(0.4)) add('gbw', ['100k', '1M', '3M', '10M', '100M', 'ideal']);
  if (g.chance(0.2)) add('a0', ['60', '100', '120', 'ideal']);
  if (g.chance(0.2)) add('rout', ['0', '10', '75', '500']);
  if (g.chance(0.3)) add('rser', ['e6', 'e12', 'e24', 'e48', 'e96', 'e192']);
  if (g.chance(0.3)) add('cser', ['e6', 'e12', 'e24', 'e48']);
  if (g.chance(0.3)) add('round', ['nearest', 'search']);
  if (g.chance(0.3)) add('rtol', ['0.1', '1', '2', '5', '10']);
  if (g.chance(0.3)) add('ctol', ['1', '2', '5', '10', '20']);
  if (g.chance(0.15)) add('vnoise', ['4n', '10n', '20n']);
  if (g.chance(0.1)) add('inoise', ['1p', '100f']);
  if (g.chance(0.15)) add('slew', ['0.5M', '5M', '20M']);
  if (g.chance(0.15)) add('rlevel', ['4.7k', '10k', '22k']);
  // One of the two ratios at most (one fixes the other).
  if (g.chance(0.1)) add(g.pick(['cratio', 'rratio']), ['1', '1.5', '2']);
  if (g.chance(0.1)) add('vin', ['0.1', '1', '5']);
  if (g.chance(0.1)) add('swing', ['2', '10', '13']);
  if (g.chance(0.2)) add('set', ['R1:12k', 'R1:4k7', 'C1:10n', 'R2:22k', 'C2:1n', 'R1:10k,C1:22n']);
  if (g.chance(0.2)) add('tolset', ['R1:0.1', 'C1:1', 'R2:0.5,C2:2']);
  return keys.join('&');
}

function fuzzedLinks() {
  const g = generator(SEED);
  return Array.from({ length: N_FUZZED }, () => fuzzedLink(g));
}

/* The command line's text, or null when it refuses the link. */
function cliText(link, kind) {
  try {
    return h.cli(['design', link.startsWith('?') ? link : '?' + link, '--format', kind]);
  } catch (error) {
    return null;
  }
}

/* Opens each link in the page's engine as opening it would (`evaluate`, accepting what is
 * valid), then asks for the three downloads as the Save menu does (`export_text`). */
async function pageTexts(page, links) {
  return page.evaluate(({ links, kinds }) => {
    const engine = window.Rolloff.engine;
    return links.map((link) => {
      const view = engine.evaluate(link, true);
      if (!view.committed) return null;
      const texts = { link: view.link };
      for (const kind of kinds) {
        const result = engine.export_text(kind);
        texts[kind] = result.ok ? result.text : null;
      }
      return texts;
    });
  }, { links, kinds: KINDS });
}

/* Compares every link's downloads with the command line's; returns what was compared and the
 * files that differ (as `link kind: first differing line`). */
async function compare(links) {
  const { page, context } = await h.openPage(browser, '');
  const fromPage = [];
  for (let start = 0; start < links.length; start += 20) {
    fromPage.push(...await pageTexts(page, links.slice(start, start + 20)));
  }
  await context.close();
  let n_links = 0;
  let n_files = 0;
  const differing = [];
  links.forEach((link, index) => {
    const texts = fromPage[index];
    if (!texts) return;
    let compared = false;
    for (const kind of KINDS) {
      // The page's link is what its downloads carry; the command line gets the same one.
      const reference = cliText(texts.link, kind);
      if (texts[kind] === null || reference === null) continue;
      compared = true;
      n_files += 1;
      if (texts[kind] !== reference) {
        const a = texts[kind].split('\n');
        const b = reference.split('\n');
        const line = a.findIndex((text, i) => text !== b[i]);
        differing.push(`${link} ${kind}: page «${a[line]}» command line «${b[line]}»`);
      }
    }
    if (compared) n_links += 1;
  });
  return { n_links, n_files, differing };
}

test('every example link downloads the command line\'s bytes (JSON, CSV, SPICE)', async () => {
  const links = exampleLinks();
  assert.ok(links.length >= 6, `README and the Examples menu give ${links.length} links`);
  const { n_links, n_files, differing } = await compare(links);
  console.log(`examples: ${n_links} links, ${n_files} files compared, ${differing.length} differ`);
  assert.equal(n_links, links.length, 'every example designs on the page and on the command line');
  assert.deepEqual(differing, [], 'the page\'s downloads are the command line\'s bytes');
});

test('260 seeded links download the command line\'s bytes (JSON, CSV, SPICE)', async () => {
  const links = fuzzedLinks();
  const { n_links, n_files, differing } = await compare(links);
  console.log(`fuzzed: ${n_links} links, ${n_files} files compared, ${differing.length} differ`);
  differing.slice(0, 10).forEach((line) => console.log(line));
  assert.ok(n_links >= 200, `${n_links} of ${links.length} seeded links designed on both faces (want ≥ 200)`);
  assert.deepEqual(differing, [], 'the page\'s downloads are the command line\'s bytes');
});

// Fuzzed links through the page's engine in Chromium: the page is opened from file:// and its own
// wasm `evaluate` export (the one the live loop calls, with the same arguments: the form's query
// and whether errors are accepted) takes links made in the page by a seeded generator over the
// link keys of src/link/keys.rs, with valid and hostile values. Checks: no exception (a wasm
// panic shows as a RuntimeError "unreachable"), every result is JSON and either a design or a
// list of field messages, no network request. Reports the time per call (median, slowest).
//
// ROLLOFF_ENGINE_FUZZ_LINKS sets the count (2,000 by default, what CI affords; 50,000 for a
// long run: `ROLLOFF_ENGINE_FUZZ_LINKS=50000 node --test tests/browser/engine_fuzz.test.js`).
'use strict';

const { test, before, after } = require('node:test');
const assert = require('node:assert/strict');
const fs = require('node:fs');
const path = require('node:path');
const h = require('./helpers');

const N_LINKS = Number(process.env.ROLLOFF_ENGINE_FUZZ_LINKS || 2000);
// Links worked per round trip to the page (a long evaluate would hit the protocol's timeout).
const PER_ROUND = 250;

/* The link keys, read from the one table of keys (`row(Key::…, "name", …)`), and one unknown. */
function linkKeys() {
  const source = fs.readFileSync(path.join(h.ROOT, 'src', 'link', 'keys.rs'), 'utf8');
  const keys = Array.from(source.matchAll(/row\(\s*Key::\w+,\s*"([a-z0-9]+)"/g), (m) => m[1]);
  return keys.concat(['zzz', 'fpass', 'apass', 'fstop', 'astop']);
}

// Values: valid ones of every kind of key, and hostile ones (markup, huge, tiny, NaN spellings,
// separators, percent-escapes, truncations are made by the generator).
const VALUES = [
  '1', '2', '0', '-1', '3', '4', '7', '8', '12', '20', '21', '0.5', '60', '100', '1k', '4k7', '2n2',
  '10µ', '1M', '10G', '1e308', '1e-308', 'NaN', 'inf', '-inf', '', 'lp', 'hp', 'bp', 'butterworth',
  'chebyshev', 'bessel', 'linkwitz-riley', 'critical', 'sk', 'mfb', 'e6', 'e12', 'e24', 'e96',
  'e192', 'exact', 'nearest', 'search', 'ideal', 'gauss', 'uniform', 'q-up', 'q-down', 'split',
  'pass', 'stop', '1k,2k', '2k,1k', '500,5k', '1,2,3', '3,1,2', 'R1:4k7', 'C1:0', 'R9:1k,C9:1n',
  'C1:50,C2:50', '<script>alert(1)</script>', '"><img src=x onerror=alert(1)>', '%00', '%ZZ',
  '%3Cb%3E', '999999999999', '1e3k', ',', ',,', '1,', '🙂', 'k', '1..2', '+1', ' 1 ', '0x10',
];

let browser;
before(async () => { browser = await h.launch(); });
after(async () => { if (browser) await browser.close(); });

test(`${N_LINKS} fuzzed links through the page's evaluate: no panic, JSON, a design or field messages`, { timeout: 3 * 3600 * 1000 }, async () => {
  const opened = await h.openPage(browser, '');
  const { page, log } = opened;
  const keys = linkKeys();
  assert.ok(keys.length >= 40 && keys.includes('passedge') && keys.includes('runs'), `keys: ${keys}`);
  // The generator lives in the page (mulberry32, seed fixed) so a failure reproduces from the
  // printed index and link.
  await page.evaluate(([keys, values]) => {
    let s = 0x5EED2026 >>> 0;
    const next = () => {
      s = (s + 0x6D2B79F5) >>> 0;
      let t = s;
      t = Math.imul(t ^ (t >>> 15), t | 1);
      t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
      return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
    };
    const below = (n) => Math.floor(next() * n);
    const pick = (a) => a[below(a.length)];
    window.fuzzLink = () => {
      const kind = below(6);
      if (kind === 0) {
        // Raw characters, printable and not.
        let text = '';
        for (let i = below(50); i > 0; i--) text += String.fromCharCode(below(0x2FF));
        return text;
      }
      const parts = [];
      if (kind !== 1) parts.push(pick(['v=2', 'v=2', 'v=1', 'v=3', 'v=']));
      for (let i = 1 + below(kind === 1 ? 12 : 4); i > 0; i--) {
        let value = pick(values);
        // A truncation, by code points (a lone surrogate cannot be percent-encoded).
        const chars = Array.from(value);
        if (below(6) === 0 && chars.length > 1) value = chars.slice(0, below(chars.length)).join('');
        const encoded = below(3) === 0 ? encodeURIComponent(value) : value;
        parts.push(pick(keys) + '=' + encoded);
      }
      return parts.join('&');
    };
  }, [keys, VALUES]);

  const times = [];
  let slowest = { ms: 0, link: '' };
  let nDesigns = 0;
  let nMessages = 0;
  let nRefused = 0;
  const problems = [];
  for (let done = 0; done < N_LINKS; done += PER_ROUND) {
    const count = Math.min(PER_ROUND, N_LINKS - done);
    const round = await page.evaluate(([first, count]) => {
      const out = { times: [], problems: [], designs: 0, messages: 0, refused: 0, slowest: { ms: 0, link: '' } };
      for (let i = first; i < first + count; i++) {
        const link = window.fuzzLink();
        // As the live loop: an opened link accepts its errors, an edit does not.
        const accept = i % 3 === 0;
        let view;
        const t0 = performance.now();
        try {
          view = window.Rolloff.engine.evaluate(link, accept);
        } catch (error) {
          out.problems.push(`#${i} ${JSON.stringify(link)}: ${error && error.name}: ${error && error.message}`);
          continue;
        }
        const ms = performance.now() - t0;
        out.times.push(ms);
        if (ms > out.slowest.ms) out.slowest = { ms, link };
        let text;
        try {
          text = JSON.stringify(view);
          JSON.parse(text);
        } catch (error) {
          out.problems.push(`#${i} ${JSON.stringify(link)}: not JSON: ${error.message}`);
          continue;
        }
        const messages = Array.isArray(view.errors) ? view.errors : null;
        const wellFormed = messages && messages.every((e) => typeof e.key === 'string'
          && typeof e.message === 'string' && e.message.length > 3);
        const design = view.committed === true && Array.isArray(view.stages) && view.stages.length > 0
          && typeof view.summary === 'string' && view.summary.length > 0 && typeof view.link === 'string';
        if (!wellFormed) {
          out.problems.push(`#${i} ${JSON.stringify(link)}: errors is not a list of field messages: ${text.slice(0, 200)}`);
        } else if (design) {
          out.designs += 1;
        } else if (messages.length > 0) {
          out.messages += 1;
        } else if (view.refused === true) {
          out.refused += 1;
        } else {
          out.problems.push(`#${i} ${JSON.stringify(link)}: neither a design nor field messages: ${text.slice(0, 200)}`);
        }
      }
      return out;
    }, [done, count]);
    times.push(...round.times);
    problems.push(...round.problems);
    nDesigns += round.designs;
    nMessages += round.messages;
    nRefused += round.refused;
    if (round.slowest.ms > slowest.ms) slowest = round.slowest;
    if (problems.length > 20) break;
  }
  times.sort((a, b) => a - b);
  const median = times.length ? times[Math.floor(times.length / 2)] : NaN;
  const p99 = times.length ? times[Math.floor(times.length * 0.99)] : NaN;
  console.log(`engine fuzz: ${times.length} calls; designs ${nDesigns}, field messages ${nMessages}, `
    + `refused ${nRefused}; median ${median.toFixed(2)} ms, p99 ${p99.toFixed(2)} ms, `
    + `slowest ${slowest.ms.toFixed(1)} ms for ${JSON.stringify(slowest.link)}; problems ${problems.length}`);
  const errors = log.errors.slice();
  const foreign = h.foreignRequests(log);
  await opened.context.close();
  assert.deepEqual(problems, [], 'exceptions or malformed results');
  assert.deepEqual(errors, [], 'console or page errors');
  assert.deepEqual(foreign, [], 'the page made a network request');
  assert.equal(times.length, N_LINKS);
  // The generator reaches both faces of the result, or the run proves little.
  assert.ok(nDesigns > N_LINKS / 10 && nMessages > N_LINKS / 10, `designs ${nDesigns}, messages ${nMessages}`);
});

// One engine under both faces: for every demo of the README and links of our own (every family,
// lp/hp/bp, Sallen-Key and multiple feedback, gains from −20 to +40 dB), the figures the page
// shows — yield, SNR, noise RMS, step figures, each stage's GBW and slew need, whether the chosen
// op amp suffices, headroom — equal the command line's design JSON and `rolloff spread` for the
// same link, at the precision the page shows them. The reference is the command line, built from
// the same core but run natively: a figure computed on a second path would differ here.
'use strict';

const { test, before, after } = require('node:test');
const assert = require('node:assert/strict');
const fs = require('node:fs');
const path = require('node:path');
const h = require('./helpers');

/* The README's example links (the demo table), so the demos are tested as they are shipped. */
function readmeLinks() {
  const text = fs.readFileSync(path.join(h.ROOT, 'README.md'), 'utf8');
  const links = [];
  for (const match of text.matchAll(/^\|[^|]*\|\s*`(\?v=[^`]+)`\s*\|/gm)) links.push(match[1].slice(1));
  return links;
}

// Scenarios of our own (invented values), chosen to cover the families, classes, topologies
// and gains; runs are kept small so the page's study finishes quickly.
const OWN = [
  'resp=lp&family=butterworth&order=5&fc=2k&gain=40',
  'resp=lp&family=chebyshev&ripple=1&order=6&fc=50k&topo=mfb&gain=-20',
  'resp=lp&family=bessel&order=3&fc=300&topo=sk',
  'resp=lp&family=linkwitz-riley&order=4&fc=3k&gain=6',
  'resp=lp&family=critical&order=2&fc=10k&topo=mfb',
  'resp=hp&family=butterworth&order=4&fc=100&gain=20',
  'resp=hp&family=chebyshev&ripple=0.5&order=5&fc=1k&topo=mfb',
  'resp=hp&family=bessel&order=3&fc=2&gain=-6',
  'resp=hp&family=linkwitz-riley&order=2&fc=80&topo=mfb&gain=12',
  'resp=hp&family=critical&order=3&fc=500',
  'resp=bp&family=butterworth&order=4&fc=1k&bw=500&topo=mfb',
  'resp=bp&family=chebyshev&ripple=0.5&order=6&fc=1k&bw=2k&gain=6&topo=mfb',
  'resp=bp&family=bessel&order=4&fc=10k&bw=5k&topo=mfb&gain=-10',
  'resp=bp&family=butterworth&order=2&fc=50&bw=20&topo=mfb&gain=30',
  'resp=lp&family=butterworth&order=8&fc=100k&gbw=10M&rser=e24&cser=e6',
  'resp=lp&family=chebyshev&ripple=2&order=7&fc=1k&round=nearest&vin=2&swing=5',
  'resp=lp&family=butterworth&order=1&fc=10k',
  'resp=hp&family=butterworth&order=6&fc=20&topo=sk&gain=3',
].map((q) => 'v=1&runs=300&seed=5&' + q);

const LINKS = readmeLinks().concat(OWN);

let browser;
before(async () => { browser = await h.launch(); });
after(async () => { if (browser) await browser.close(); });

/* What the page shows, as text, once its tolerance study has finished. */
async function readPage(query) {
  const { context, page, log } = await h.openPage(browser, query);
  await h.waitForStudy(page, null);
  const shown = await page.evaluate(() => ({
    figures: document.querySelector('#figures').textContent,
    study: document.querySelector('#study-status').textContent,
    needs: Array.from(document.querySelectorAll('#stage-cards .card .needs')).map((n) => n.textContent),
    link: window.location.search.slice(1),
  }));
  await context.close();
  assert.deepEqual(log.errors, [], `${query}: the page logged errors`);
  return shown;
}

/* A number the page writes with three significant digits (engineering notation) agrees with
 * the reference when both round to the same three digits. */
function sameAtThreeDigits(shownText, reference, what) {
  const shown = h.parseEng(shownText);
  assert.ok(Number.isFinite(shown), `${what}: the page shows no number in “${shownText}”`);
  const rel = Math.abs(shown - reference) / Math.abs(reference);
  assert.ok(rel <= 5.01e-3, `${what}: page ${shownText}, command line ${reference}`);
}
function sameAtDecimals(shownText, reference, decimals, what) {
  const shown = Number(String(shownText).replace(/\u2212/g, '-'));
  assert.equal(shown.toFixed(decimals), Number(reference).toFixed(decimals), `${what}: page ${shownText}, command line ${reference}`);
}

for (const link of LINKS) {
  test(`page = command line for ${link}`, async () => {
    const shown = await readPage(link);
    const json = JSON.parse(h.cli(['design', link, '--format', 'json']));
    const spread = JSON.parse(h.cli(['spread', link, '--format', 'json']));
    const a = json.analysis;

    // The link in the address bar is the command line's own link for the design.
    assert.equal('?' + shown.link, json.link, 'address bar');

    // Yield (one decimal) and the run count of the study.
    const y = /yield ([\d.]+) %/.exec(shown.study);
    if (spread.yield === null) {
      assert.ok(!y, `no limits, but the page shows a yield: ${shown.study}`);
    } else {
      assert.ok(y, `the page shows no yield: “${shown.study}”`);
      sameAtDecimals(y[1], spread.yield * 100, 1, 'yield %');
    }
    // Where the runs' responses come from: the loaded board for every run exactly when the
    // command line's study says so.
    assert.equal(shown.study.includes('each run solved on the loaded board'), spread.loaded_runs === true,
      `loaded runs: page “${shown.study}”, spread ${spread.loaded_runs}`);

    // Noise RMS and SNR.
    if (a.noise) {
      const rms = /output noise (\S+ ?\S*V) rms/.exec(shown.figures);
      assert.ok(rms, `no noise figure in “${shown.figures}”`);
      sameAtThreeDigits(rms[1], a.noise.rms_v, 'noise rms');
      if (a.noise.snr_db !== null) {
        const snr = /SNR (\S+) dB/.exec(shown.figures);
        assert.ok(snr, `no SNR in “${shown.figures}”`);
        sameAtDecimals(snr[1], a.noise.snr_db, 1, 'SNR dB');
      }
    }

    // Step figures.
    if (a.step && a.step.overshoot_pct !== null) {
      const o = /overshoot (\S+) %/.exec(shown.figures);
      assert.ok(o, `no overshoot in “${shown.figures}”`);
      sameAtDecimals(o[1], a.step.overshoot_pct, 1, 'overshoot %');
    }
    if (a.step && a.step.settling_1pct_s !== null) {
      const s = /settles to 1 % in (\S+ ?\S*s)/.exec(shown.figures);
      assert.ok(s, `no settling time in “${shown.figures}”`);
      sameAtThreeDigits(s[1], a.step.settling_1pct_s, 'settling to 1 %');
    }

    // Each stage: GBW need, slew need, the verdict on the chosen op amp, headroom.
    assert.equal(shown.needs.length, json.stages.length, 'one needs line per stage');
    shown.needs.forEach((text, k) => {
      const need = a.opamp_needs.stages[k];
      const what = `stage ${k + 1}`;
      if (need.min_gbw_hz !== null) {
        const g = /GBW ≥ (\S+ ?\S*Hz)/.exec(text);
        assert.ok(g, `${what}: no GBW in “${text}”`);
        sameAtThreeDigits(g[1], need.min_gbw_hz, `${what} GBW need`);
      }
      const s = /slew ≥ (\S+ ?\S*V\/s)/.exec(text);
      assert.ok(s, `${what}: no slew in “${text}”`);
      sameAtThreeDigits(s[1], need.slew_v_per_s, `${what} slew need`);
      // The stage's own two figures against the chosen op amp (the JSON's op_amp).
      // (null in the JSON is an ideal, unbounded figure.)
      const figure = (v) => (v === null ? Infinity : v);
      const slewOk = figure(json.op_amp.slew_v_per_s) >= need.slew_v_per_s;
      const gbwOk = need.min_gbw_hz !== null && figure(json.op_amp.gbw_hz) >= need.min_gbw_hz;
      const verdict = slewOk && gbwOk ? 'the chosen op amp has both'
        : slewOk ? 'the chosen op amp has the slew rate but not this GBW'
          : gbwOk ? 'the chosen op amp has this GBW but not the slew rate'
            : 'the chosen op amp has neither';
      assert.ok(text.includes(verdict), `${what}: “${text}” should say ${verdict}`);
      const room = /\((\S+) dB headroom\)/.exec(text);
      assert.ok(room, `${what}: no headroom in “${text}”`);
      sameAtDecimals(room[1], a.levels[k].headroom_db, 1, `${what} headroom dB`);
    });
  });
}

test('the suite covers at least 20 links, every demo among them', () => {
  assert.ok(readmeLinks().length >= 4, 'the README lists its demos');
  assert.ok(LINKS.length >= 20, `${LINKS.length} links`);
});

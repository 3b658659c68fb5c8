/* Rolloff page, the start: once the wasm core (rolloff-wasm.js) has started, the form gets the
 * core's defaults, the page its listeners, and the address its design. Loaded last. */
(function (R) {
  'use strict';

  function start(core) {
    R.engine = core;
    R.showDefaults();
    R.wire();
    if (typeof rolloffOpening !== 'undefined') rolloffOpening.started = performance.now();
    R.openQuery(R.startLink());
    R.showLink();
    // Time from the start of navigation to the first drawn plot (for the benchmark).
    document.body.setAttribute('data-first-draw-ms', performance.now().toFixed(1));
    if (typeof rolloffOpening !== 'undefined') {
      rolloffOpening.drawn = performance.now();
      document.body.setAttribute('data-opening', JSON.stringify(rolloffOpening));
    }
    document.body.setAttribute('data-ready', '1');
  }
  if (typeof rolloffReady === 'undefined') {
    R.showDefect('the wasm core (rolloff-wasm.js) is missing: run ./build.sh');
    return;
  }
  rolloffReady.then(start, function (error) { R.showDefect('the wasm core failed to start: ' + error); });
})(window.Rolloff);

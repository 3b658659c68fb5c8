/* Rolloff page, the start: once the wasm core (rolloff-wasm.js) has started, the form gets the
 * core's defaults, the page its listeners, and the address its design. Loaded last.
 *
 * Opening draws the large plot first and shows it: the thumbnails and the stage cards'
 * schematics asked for in the same update are drawn in a task after the frame that paints it.
 * The core's first calls are its slowest (each function is compiled on its first call), so the
 * fifteen other canvases would otherwise hold the first picture back by about as long as the
 * design itself took. */
(function (R) {
  'use strict';

  /* The core as the page sees it while opening: `draw_plot` for any canvas but the large one and
   * `draw_schematic` are kept in `later` instead of drawn. */
  function deferringEngine(core, later) {
    var engine = Object.create(core);
    engine.draw_plot = function (kind, canvas) {
      if (canvas.id === 'plot-main') return core.draw_plot.apply(core, arguments);
      later.set(canvas, ['draw_plot', Array.prototype.slice.call(arguments)]);
    };
    engine.draw_schematic = function (index, canvas) {
      later.set(canvas, ['draw_schematic', Array.prototype.slice.call(arguments)]);
    };
    return engine;
  }
  function stamp(key) {
    if (typeof rolloffOpening !== 'undefined') rolloffOpening[key] = performance.now();
  }

  function start(core) {
    var later = new Map();
    R.engine = deferringEngine(core, later);
    R.showDefaults();
    R.wire();
    stamp('started');
    R.openQuery(R.startLink());
    R.showLink();
    // Time from the start of navigation to the first drawn plot (for the benchmark).
    document.body.setAttribute('data-first-draw-ms', performance.now().toFixed(1));
    stamp('drawn');
    R.engine = core;
    // After the frame that shows the large plot: the other canvases. Each call draws the design
    // the core holds then, so an edit made in between is drawn, not the opened one.
    window.requestAnimationFrame(function () {
      window.setTimeout(function () {
        later.forEach(function (call, canvas) {
          if (canvas.isConnected) core[call[0]].apply(core, call[1]);
        });
        later.clear();
        stamp('all_drawn');
        if (typeof rolloffOpening !== 'undefined') {
          document.body.setAttribute('data-opening', JSON.stringify(rolloffOpening));
        }
        document.body.setAttribute('data-ready', '1');
      }, 0);
    });
  }
  if (typeof rolloffReady === 'undefined') {
    R.showDefect('the wasm core (rolloff-wasm.js) is missing: run ./build.sh');
    return;
  }
  rolloffReady.then(start, function (error) { R.showDefect('the wasm core failed to start: ' + error); });
})(window.Rolloff);

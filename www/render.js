/* Rolloff page, drawing: the canvases (sized from a ResizeObserver, drawn by the core), the stage
 * cards, the summary, the notice, the crosshair readout and the printed report. Everything shown
 * comes from the core's view model; this file only puts it on the page. */
(function (R) {
  'use strict';
  var $ = R.$, $$ = R.$$, state = R.state, setText = R.setText;
  var dark = window.matchMedia ? window.matchMedia('(prefers-color-scheme: dark)') : null;
  var isDark = function () { return !!(dark && dark.matches); };

  function showNotice(items) {
    var notice = $('#notice');
    var list = $('#notice-list');
    list.textContent = '';
    items.forEach(function (item) {
      var li = document.createElement('li');
      li.textContent = item;
      list.appendChild(li);
    });
    notice.hidden = items.length === 0;
  }

  // ---- canvases ----
  function dpr() { return Math.min(Math.max(window.devicePixelRatio || 1, 1), 3); }
  /* The CSS size of every canvas, as the browser last laid it out. A ResizeObserver on each
   * canvas keeps it (its callback runs right after layout, when reading sizes costs nothing), so
   * an update never reads the layout: a read after an edit would make the browser lay the page
   * out inside the update and then again in the frame that shows it. A canvas that changes size
   * is redrawn on the next frame; one not seen yet (a new stage card) is measured once. */
  var sizes = new WeakMap();
  var resized = new Set();
  var resizeFrame = 0;
  var watcher = window.ResizeObserver ? new ResizeObserver(function (entries) {
    entries.forEach(function (entry) {
      var c = entry.target;
      var size = [c.clientWidth, c.clientHeight];
      var old = sizes.get(c);
      sizes.set(c, size);
      if (old && (old[0] !== size[0] || old[1] !== size[1])) resized.add(c);
    });
    if (!resized.size || resizeFrame || !state.committed) return;
    resizeFrame = window.requestAnimationFrame(function () {
      resizeFrame = 0;
      var list = Array.from(resized);
      resized.clear();
      list.forEach(function (c) { if (c.isConnected) drawOne(c); });
    });
  }) : null;
  function watchCanvas(canvas) { if (watcher) watcher.observe(canvas); }
  /* A card leaving the page takes its canvas out of the watch (the observer would keep it). */
  function forgetCanvases(node) {
    if (watcher) $$('canvas', node).forEach(function (c) { watcher.unobserve(c); resized.delete(c); });
  }
  function sizeOf(canvas) {
    var size = watcher && sizes.get(canvas);
    if (size) return size;
    size = [canvas.clientWidth, canvas.clientHeight];
    if (watcher) sizes.set(canvas, size);
    return size;
  }
  function fitCanvas(canvas, size) {
    var ratio = dpr();
    var w = Math.max(1, Math.round(size[0] * ratio));
    var h = Math.max(1, Math.round(size[1] * ratio));
    if (canvas.width !== w) canvas.width = w;
    if (canvas.height !== h) canvas.height = h;
  }
  function plotOf(canvas) {
    return canvas.id === 'plot-main' ? state.mainPlot : canvas.getAttribute('data-plot');
  }
  var printing = false;   // the report prints dark ink on white whatever the screen theme
  function theme() { return printing ? false : isDark(); }
  function drawCanvas(canvas) {
    var size = sizeOf(canvas);
    if (!size[0]) return;
    fitCanvas(canvas, size);
    R.engine.draw_plot(plotOf(canvas), canvas, theme(), dpr(), canvas.hasAttribute('data-compact'));
  }
  function drawSchematic(canvas) {
    fitCanvas(canvas, sizeOf(canvas));
    R.engine.draw_schematic(Number(canvas.getAttribute('data-stage')), canvas, theme(), dpr());
  }
  function drawOne(canvas) {
    if (canvas.hasAttribute('data-stage')) drawSchematic(canvas); else if (plotOf(canvas)) drawCanvas(canvas);
  }
  /* Draws every plot and schematic. */
  function drawAll() {
    $$('canvas[data-plot]').forEach(drawCanvas);
    $$('.card canvas').forEach(drawSchematic);
  }
  /* Redraws the plots the study changes: the large one, the gain thumbnail and the histograms. */
  function drawStudy() {
    drawCanvas($('#plot-main'));
    $$('canvas[data-plot^="hist-"], .thumb canvas[data-plot="magnitude"]').forEach(drawCanvas);
  }

  // ---- rendering the view model ----
  function el(tag, className, text) {
    var node = document.createElement(tag);
    if (className) node.className = className;
    if (text !== undefined && text !== null) node.textContent = String(text);
    return node;
  }

  /* Writes only what changed: an unchanged text or class left alone costs the browser no new
   * layout, and most of the page stays the same from one keystroke to the next. */
  function setClass(node, name) {
    if (node.className !== name) node.className = name;
  }
  /* Fills `host` with one child per item: `make()` builds a missing child, `fill(child, item)`
   * writes it; children beyond the items are removed. */
  function fillList(host, items, make, fill) {
    var kids = host.children;
    items.forEach(function (item, i) {
      var child = kids[i];
      if (!child) { child = make(); host.appendChild(child); }
      fill(child, item);
    });
    while (kids.length > items.length) host.removeChild(kids[kids.length - 1]);
  }
  function textRow(tag, classes) {
    return function () {
      var tr = el('tr');
      classes.forEach(function (c, i) { tr.appendChild(el(i === 0 ? tag : 'td', c)); });
      return tr;
    };
  }
  function fillItems(ul, list) {
    fillList(ul, list, function () { return el('li'); }, setText);
  }

  function renderStages(stages) {
    var host = $('#stage-cards');
    var cards = $$('.card', host);
    stages.forEach(function (stage, i) {
      var key = stage.key;
      var card = cards[i];
      if (!card || card.getAttribute('data-key') !== key) {
        var fresh = buildCard(stage);
        if (card) { forgetCanvases(card); host.replaceChild(fresh, card); } else host.appendChild(fresh);
        card = fresh;
      }
      fillCard(card, stage);
    });
    cards.slice(stages.length).forEach(function (c) { forgetCanvases(c); c.remove(); });
  }

  function buildCard(stage) {
    var card = el('article', 'card');
    card.setAttribute('data-key', stage.key);
    card.setAttribute('aria-label', 'stage ' + stage.number);
    var h = el('h3');
    h.appendChild(el('span', 'name'));
    h.appendChild(el('span', 'kind'));
    card.appendChild(h);
    var canvas = el('canvas');
    canvas.setAttribute('data-stage', String(stage.index));
    canvas.setAttribute('role', 'img');
    card.appendChild(canvas);
    watchCanvas(canvas);

    var table = el('table', 'targets');
    var head = el('tr');
    ['', 'target', 'parts, ideal op amp', 'error'].forEach(function (t) { var th = el('th', null, t); th.scope = 'col'; head.appendChild(th); });
    table.appendChild(head);
    stage.rows.forEach(function () {
      var tr = el('tr');
      var th = el('th'); th.scope = 'row'; tr.appendChild(th);
      tr.appendChild(el('td', 'num')); tr.appendChild(el('td', 'num')); tr.appendChild(el('td', 'num'));
      table.appendChild(tr);
    });
    card.appendChild(table);

    var parts = el('table', 'parts');
    var ph = el('tr');
    ['part', 'value', 'designed', 'tolerance', ''].forEach(function (t) { var th = el('th', null, t); th.scope = 'col'; ph.appendChild(th); });
    parts.appendChild(ph);
    stage.parts.forEach(function (part) {
      var tr = el('tr');
      tr.setAttribute('data-ref', part.reference);
      var th = el('th', null, part.reference); th.scope = 'row'; th.title = part.role; tr.appendChild(th);
      var td = el('td', 'value');
      var input = el('input');
      input.setAttribute('aria-label', part.reference + ' value (' + part.role + ')');
      input.setAttribute('data-ref', part.reference);
      input.setAttribute('spellcheck', 'false');
      input.addEventListener('input', function () {
        var text = input.value.trim();
        if (text) state.overrides.set(part.reference, text); else state.overrides.delete(part.reference);
        R.schedule();
      });
      td.appendChild(input);
      tr.appendChild(td);
      tr.appendChild(el('td', 'num ideal'));
      tr.appendChild(el('td', 'num tol'));
      var reset = el('button', null, 'reset');
      reset.type = 'button';
      reset.setAttribute('aria-label', 'use the designed value for ' + part.reference);
      reset.addEventListener('click', function () { state.overrides.delete(part.reference); R.schedule(); });
      var rc = el('td'); rc.appendChild(reset); tr.appendChild(rc);
      parts.appendChild(tr);
    });
    card.appendChild(parts);

    var sens = el('details', 'sens');
    sens.appendChild(el('summary', null, 'sensitivities of f0 and Q'));
    var st = el('table');
    var sh = el('tr');
    ['part', 'S f0', 'S Q'].forEach(function (t) { var th = el('th', null, t); th.scope = 'col'; sh.appendChild(th); });
    st.appendChild(sh);
    sens.appendChild(st);
    card.appendChild(sens);
    card.appendChild(el('p', 'needs'));
    card.appendChild(el('ul', 'warnings'));
    return card;
  }

  function fillCard(card, stage) {
    setText($('.name', card), stage.title);
    setText($('.kind', card), stage.circuit);
    var canvas = $('canvas', card);
    var label = 'schematic of stage ' + stage.number + ': ' + stage.circuit;
    if (canvas.getAttribute('aria-label') !== label) canvas.setAttribute('aria-label', label);
    var rows = $$('table.targets tr', card).slice(1);
    stage.rows.forEach(function (row, i) {
      var cells = rows[i].children;
      setText(cells[0], row.what);
      setText(cells[1], row.target);
      setText(cells[2], row.achieved);
      setText(cells[3], row.error);
      setClass(cells[3], 'num ' + (row.large ? 'err-big' : 'err-ok'));
    });
    stage.parts.forEach(function (part) {
      var tr = $('tr[data-ref="' + CSS.escape(part.reference) + '"]', card);
      if (!tr) return;
      var input = $('input', tr);
      var typed = state.overrides.has(part.reference);
      tr.classList.toggle('typed', typed);
      var shown = typed ? state.overrides.get(part.reference) : part.value;
      if (document.activeElement !== input && input.value !== shown) input.value = shown;
      setText($('.ideal', tr), part.ideal);
      setText($('.tol', tr), part.tolerance);
      var button = $('button', tr);
      if (button.disabled !== !typed) button.disabled = !typed;
    });
    var body = $('.sens tbody', card) || $('.sens table', card).appendChild(el('tbody'));
    fillList(body, stage.sensitivities, textRow('th', [null, 'num', 'num']), function (tr, s) {
      setText(tr.children[0], s.reference);
      setText(tr.children[1], s.f0);
      setText(tr.children[2], s.q);
    });
    var sens = $('.sens', card);
    if (sens.hidden !== (stage.sensitivities.length === 0)) sens.hidden = stage.sensitivities.length === 0;
    setText($('.needs', card), stage.needs);
    fillItems($('ul.warnings', card), stage.warnings);
  }

  function renderCompare(view) {
    fillList($('#compare tbody'), view.comparison, textRow('td', [null, 'num', null]), function (tr, row) {
      setClass(tr, row.current ? 'current' : '');
      setText(tr.children[0], row.family);
      setText(tr.children[1], row.order);
      setText(tr.children[2], row.note);
    });
    setText($('#compare-hint'), view.comparison_hint);
  }

  function renderWarnings(list) {
    fillItems($('#warnings'), list);
  }

  function setStale(stale) {
    state.stale = stale;
    document.body.classList.toggle('stale', stale);
  }

  function timed(work) {
    var t0 = performance.now();
    work();
    return performance.now() - t0;
  }
  /* Whether the stage cards on the page are those of `stages` (no card to add or replace). */
  function sameStages(stages) {
    var cards = $$('#stage-cards .card');
    return cards.length === stages.length && stages.every(function (stage, i) {
      return cards[i].getAttribute('data-key') === stage.key;
    });
  }

  /* Puts a view of the core on the page. `initial`: the view of an opened link, whose errors
   * all go to the notice. Returns whether the view's design is now the one on screen. */
  function render(view, initial) {
    var loose = R.showMessages(view.errors);
    var notes = view.ignored.slice();
    if (initial) view.errors.forEach(function (e) { notes.push(e.key + ': ' + e.message); });
    else loose.forEach(function (e) { notes.push(e.key + ': ' + e.message); });
    if (initial || notes.length || !$('#notice').hidden) showNotice(notes);
    if (view.committed) {
      // The canvases are drawn before the page's text changes when the stage cards stay: a
      // canvas resolves its font against the page's style, so text written first would make the
      // browser recompute the style inside the update and then again for the frame.
      var drawFirst = sameStages(view.stages);
      var drawMs = drawFirst ? timed(drawAll) : 0;
      setText($('#summary'), view.summary);
      setText($('#figures'), view.figures);
      renderWarnings(view.warnings);
      renderStages(view.stages);
      renderCompare(view);
      if (!drawFirst) drawMs = timed(drawAll);
      document.body.setAttribute('data-draw-ms', drawMs.toFixed(2));
      state.committed = true;
      setStale(false);
    } else {
      setStale(state.committed);
      if (!state.committed) $('#summary').textContent = 'No design yet: ' + (view.errors[0] ? view.errors[0].message : 'check the fields');
    }
    return view.committed;
  }

  // ---- crosshair readout ----
  function readoutAt(figure, canvas, x, y) {
    var ratio = dpr();
    var line = $('.crosshair', figure);
    var box = $('.readout', figure);
    var r = R.engine.read_plot(plotOf(canvas), canvas.width, canvas.height, ratio, false, x * ratio, y * ratio);
    if (!r) { line.style.display = 'none'; box.style.display = 'none'; return; }
    line.style.display = 'block';
    line.style.left = x + 'px';
    box.textContent = '';
    var head = el('div');
    head.appendChild(el('b', null, r.x));
    head.appendChild(document.createTextNode('  ·  ' + r.y));
    box.appendChild(head);
    r.entries.forEach(function (entry) { box.appendChild(el('div', null, entry.label + ': ' + entry.value)); });
    box.style.display = 'block';
    var w = box.offsetWidth;
    var left = x + 14 + w > canvas.clientWidth ? x - 14 - w : x + 14;
    box.style.left = Math.max(2, left) + 'px';
    box.style.top = Math.max(2, Math.min(y + 10, canvas.clientHeight - box.offsetHeight - 2)) + 'px';
  }
  function hideReadout(figure) {
    $('.crosshair', figure).style.display = 'none';
    $('.readout', figure).style.display = 'none';
  }
  function wireReadout(figure) {
    var canvas = $('canvas', figure);
    canvas.addEventListener('pointermove', function (event) {
      var rect = canvas.getBoundingClientRect();
      readoutAt(figure, canvas, event.clientX - rect.left, event.clientY - rect.top);
    });
    canvas.addEventListener('pointerleave', function () { hideReadout(figure); });
    canvas.tabIndex = 0;
    canvas.addEventListener('keydown', function (event) {
      var step = event.shiftKey ? 20 : 4;
      var w = canvas.clientWidth;
      var h = canvas.clientHeight;
      if (!state.cursor || state.cursor.canvas !== canvas) state.cursor = { canvas: canvas, x: w / 2, y: h / 2 };
      if (event.key === 'ArrowLeft') state.cursor.x = Math.max(0, state.cursor.x - step);
      else if (event.key === 'ArrowRight') state.cursor.x = Math.min(w, state.cursor.x + step);
      else if (event.key === 'ArrowUp') state.cursor.y = Math.max(0, state.cursor.y - step);
      else if (event.key === 'ArrowDown') state.cursor.y = Math.min(h, state.cursor.y + step);
      else if (event.key === 'Escape') { hideReadout(figure); return; }
      else return;
      event.preventDefault();
      readoutAt(figure, canvas, state.cursor.x, state.cursor.y);
    });
    canvas.addEventListener('blur', function () { hideReadout(figure); });
  }

  function chooseMain(kind) {
    state.mainPlot = kind;
    $$('.thumb').forEach(function (b) { b.setAttribute('aria-pressed', String(b.getAttribute('data-plot') === kind)); });
    var main = $('#plot-main');
    var label = $('.thumb[data-plot="' + kind + '"] span');
    main.setAttribute('aria-label', (label ? label.textContent : kind) + ' plot');
    hideReadout(main.closest('figure'));
    if (state.committed) drawCanvas(main);
  }

  // ---- the printed report ----
  /* The report carries the design's link (the address), so a printed sheet leads back to the
   * design. It is kept up to date with the address, not only before printing: a print preview
   * or a print-to-file may lay the page out without a beforeprint event. */
  function showLink() {
    setText($('#print-link'), window.location.href);
  }
  /* The printed report shows every plot at a readable size, not only the one in the large slot. */
  function preparePrint() {
    printing = true;
    showLink();
    if (state.committed) drawAll();
    var host = $('.print-plots');
    if (!host) {
      host = el('div', 'print-plots');
      $('#plots').appendChild(host);
    }
    host.textContent = '';
    $$('.thumb').forEach(function (b) {
      var kind = b.getAttribute('data-plot');
      if (kind === state.mainPlot) return;
      var fig = el('figure', 'plot');
      var canvas = el('canvas');
      canvas.width = 1040;
      canvas.height = 440;
      fig.appendChild(canvas);
      host.appendChild(fig);
      R.engine.draw_plot(kind, canvas, false, 2, false);
    });
  }
  function afterPrint() {
    printing = false;
    if (state.committed) drawAll();
  }

  /* The screen's canvases: each one watched for its size, redrawn when the theme changes. */
  function wireCanvases() {
    $$('figure.plot').forEach(wireReadout);
    $$('canvas').forEach(watchCanvas);
    if (dark && dark.addEventListener) dark.addEventListener('change', function () { if (state.committed) drawAll(); });
  }

  R.showNotice = showNotice;
  R.render = render;
  R.drawStudy = drawStudy;
  R.chooseMain = chooseMain;
  R.showLink = showLink;
  R.preparePrint = preparePrint;
  R.afterPrint = afterPrint;
  R.wireCanvases = wireCanvases;
})(window.Rolloff);

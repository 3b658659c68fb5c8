/* Rolloff page glue. It reads the form, calls one export of the wasm core per action, sizes the
 * canvases and shows status. Every computation and every pixel of the plots comes from Rust.
 * Text that can come from a link is only ever set with textContent. */
(function () {
  'use strict';

  var $ = function (selector, root) { return (root || document).querySelector(selector); };
  var $$ = function (selector, root) { return Array.prototype.slice.call((root || document).querySelectorAll(selector)); };

  var form = $('#req');
  var engine = null;
  var state = {
    mainPlot: 'magnitude',
    overrides: new Map(),   // part reference → text typed over it
    committed: false,       // a design has been drawn at least once
    stale: false,
    frame: 0,
    study: null,            // { cancelled, chunk }
    studyTimer: 0,
    studies: 0,             // finished tolerance studies (stamped on <body> for tests)
    lastQuery: null,        // the link of the design on screen (or of the last refused edit)
    cursor: null,           // keyboard crosshair position (CSS px) on the main plot
  };
  var dark = window.matchMedia ? window.matchMedia('(prefers-color-scheme: dark)') : null;
  var isDark = function () { return !!(dark && dark.matches); };

  // ---- defects: a panic in Rust or an exception here is shown on the page, never swallowed ----
  function showDefect(text) {
    var box = $('#defect');
    box.hidden = false;
    box.textContent = 'Rolloff hit an internal defect, please report it: ' + text;
  }
  window.addEventListener('error', function (event) { showDefect(String(event.message || event.error)); });
  window.addEventListener('unhandledrejection', function (event) { showDefect(String(event.reason)); });

  // ---- the form ⇄ the link ----
  function fields() {
    return Array.prototype.filter.call(form.elements, function (el) { return el.name; });
  }
  /* Defaults are read once from the markup, before any link is applied (a hidden input's
   * defaultValue follows its value, so it cannot be asked later). */
  var defaults = new Map();
  function recordDefaults() {
    fields().forEach(function (el) {
      if (el.type === 'radio') return;
      if (el.tagName === 'SELECT') {
        var chosen = Array.prototype.find.call(el.options, function (o) { return o.defaultSelected; });
        defaults.set(el, chosen ? chosen.value : (el.options[0] ? el.options[0].value : ''));
      } else {
        defaults.set(el, el.value);
      }
    });
  }
  function fieldDefault(el) {
    return defaults.has(el) ? defaults.get(el) : '';
  }
  function radioValue(name) {
    var checked = $$('input[name="' + name + '"]', form).find(function (r) { return r.checked; });
    return checked ? checked.value : '';
  }
  function setRadio(name, value) {
    var radios = $$('input[name="' + name + '"]', form);
    var hit = radios.find(function (r) { return r.value === value; });
    radios.forEach(function (r) { r.checked = (r === hit) ? true : r.defaultChecked && !hit; });
    return !!hit;
  }

  /* The query string of the form: `v=2`, then every field that differs from its default, the
   * order when it is fixed, and the parts typed over. */
  function readForm() {
    var params = new URLSearchParams();
    params.set('v', '2');
    var mode = radioValue('ordermode');
    var seen = {};
    fields().forEach(function (el) {
      var name = el.name;
      if (name === 'ordermode' || seen[name]) return;
      if (el.type === 'radio') {
        seen[name] = true;
        var value = radioValue(name);
        var def = ($$('input[name="' + name + '"]', form).find(function (r) { return r.defaultChecked; }) || {}).value;
        if (value && value !== def) params.set(name, value);
        return;
      }
      var text = el.value.trim();
      if (name === 'order') {
        if (mode === 'fixed' && text) params.set('order', text);
        return;
      }
      if (text && text !== fieldDefault(el)) params.set(name, text);
    });
    if (state.overrides.size) {
      var list = [];
      state.overrides.forEach(function (text, ref) { list.push(ref + ':' + text); });
      params.set('set', list.join(','));
    }
    return params.toString();
  }

  /* A version-1 link names the limits as v1 did (README, "Version 1 links"); the form's fields
   * have the version-2 names. The core reads a link without `v` as version 1 when it names only
   * v1 limits, and so does this. A stopgap until the form is filled from the core's form values. */
  var V1_NAMES = { fpass: 'passedge', apass: 'passloss', fstop: 'stopedge', astop: 'stopdepth' };
  function fieldNames(params) {
    var oldNames = Object.keys(V1_NAMES);
    var newNames = oldNames.map(function (k) { return V1_NAMES[k]; });
    var has = function (k) { return params.has(k); };
    var v = params.get('v');
    if (!(v === '1' || (v === null && oldNames.some(has) && !newNames.some(has)))) return params;
    // In a version-1 link the new names are unknown keys: they fill no field.
    var out = new URLSearchParams();
    params.forEach(function (value, key) {
      if (V1_NAMES[key]) out.set(V1_NAMES[key], value);
      else if (newNames.indexOf(key) < 0) out.append(key, value);
    });
    out.set('v', '2');
    return out;
  }

  /* Puts a link's values into the form. Unknown keys and bad values are left to the core, which
   * reports them; a select keeps its default when the link's value is not one of its options. */
  function applyQuery(params) {
    fields().forEach(function (el) {
      if (el.type === 'radio') {
        el.checked = el.defaultChecked;
      } else {
        el.value = fieldDefault(el);
      }
    });
    state.overrides = new Map();
    params.forEach(function (value, key) {
      if (key === 'set') {
        value.split(',').forEach(function (pair) {
          var at = pair.indexOf(':');
          if (at > 0) state.overrides.set(pair.slice(0, at).trim(), pair.slice(at + 1).trim());
        });
        return;
      }
      var els = fields().filter(function (el) { return el.name === key; });
      if (!els.length) return;
      if (els[0].type === 'radio') { setRadio(key, value); return; }
      var el = els[0];
      if (el.tagName === 'SELECT') {
        if (Array.prototype.some.call(el.options, function (o) { return o.value === value; })) el.value = value;
      } else {
        el.value = value;
      }
    });
    var hasLimits = params.has('passedge') || params.has('stopedge') || params.has('fsample');
    setRadio('ordermode', params.has('order') || !hasLimits ? 'fixed' : 'limits');
    if (params.has('fsample') || params.has('adcbits') || params.has('fsignal')) $('#converter').open = true;
    var title = params.get('title');
    var titleBox = $('#design-title');
    titleBox.hidden = !title;
    titleBox.textContent = title || '';
    syncVisibility();
  }

  function syncVisibility() {
    var values = { resp: radioValue('resp'), ordermode: radioValue('ordermode'), family: form.elements.family.value };
    $$('[data-show]', form).forEach(function (el) {
      var hidden = !el.getAttribute('data-show').split('&').every(function (rule) {
        var pair = rule.split('=');
        return values[pair[0]] === pair[1];
      });
      if (el.hidden !== hidden) el.hidden = hidden;
    });
    $$('[data-text-resp]', form).forEach(function (el) {
      var parts = el.getAttribute('data-text-resp').split(':');
      var texts = parts[1].split('|');
      setText(el, values.resp === parts[0] ? texts[0] : texts[1]);
    });
  }

  // ---- field messages ----
  function fieldBox(key) {
    if (key.indexOf('set:') === 0) {
      var row = $('tr[data-ref="' + CSS.escape(key.slice(4)) + '"]');
      return row ? { box: row.querySelector('td.value'), input: row.querySelector('input') } : null;
    }
    var el = fields().find(function (e) { return e.name === key; });
    if (!el) return null;
    var box = el.closest('.field');
    if (!box || box.hidden || box.closest('[hidden]')) {
      if (key === 'order') box = $('#l-order').closest('.field');
      else return null;
    }
    return { box: box, input: el };
  }
  function clearMessages() {
    $$('.field.bad, td.value.bad').forEach(function (b) { b.classList.remove('bad'); });
    $$('.field .msg, td.value .msg').forEach(function (m) { m.remove(); });
    $$('[aria-invalid]').forEach(function (i) { i.removeAttribute('aria-invalid'); });
  }
  function showMessages(errors) {
    clearMessages();
    var loose = [];
    errors.forEach(function (error, index) {
      var target = fieldBox(error.key);
      if (!target) { loose.push(error); return; }
      target.box.classList.add('bad');
      var msg = document.createElement('span');
      msg.className = 'msg';
      msg.id = 'msg-' + index;
      msg.textContent = error.message;
      target.box.appendChild(msg);
      if (target.input) {
        target.input.setAttribute('aria-invalid', 'true');
        target.input.setAttribute('aria-describedby', msg.id);
      }
    });
    return loose;
  }

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
    engine.draw_plot(plotOf(canvas), canvas, theme(), dpr(), canvas.hasAttribute('data-compact'));
  }
  function drawSchematic(canvas) {
    fitCanvas(canvas, sizeOf(canvas));
    engine.draw_schematic(Number(canvas.getAttribute('data-stage')), canvas, theme(), dpr());
  }
  function drawOne(canvas) {
    if (canvas.hasAttribute('data-stage')) drawSchematic(canvas); else if (plotOf(canvas)) drawCanvas(canvas);
  }
  /* Draws every plot and schematic. */
  function drawAll() {
    $$('canvas[data-plot]').forEach(drawCanvas);
    $$('.card canvas').forEach(drawSchematic);
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
  function setText(node, text) {
    if (node.textContent !== text) node.textContent = text;
  }
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
    ['', 'target', 'on the board', 'error'].forEach(function (t) { var th = el('th', null, t); th.scope = 'col'; head.appendChild(th); });
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
    ['part', 'value', 'designed', ''].forEach(function (t) { var th = el('th', null, t); th.scope = 'col'; ph.appendChild(th); });
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
        schedule();
      });
      td.appendChild(input);
      tr.appendChild(td);
      tr.appendChild(el('td', 'num ideal'));
      var reset = el('button', null, 'reset');
      reset.type = 'button';
      reset.setAttribute('aria-label', 'use the designed value for ' + part.reference);
      reset.addEventListener('click', function () { state.overrides.delete(part.reference); schedule(); });
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

  function render(view, initial) {
    var loose = showMessages(view.errors);
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

  /* The address bar follows the design, a moment after the typing stops: replacing the history
   * entry is a round trip to the browser that costs more than the whole redraw, and Chromium
   * refuses it when it comes hundreds of times in a few seconds. Leaving the page, copying the
   * link or printing writes it at once. */
  var address = { timer: 0, query: null };
  function keepAddress(query) {
    address.query = query;
    window.clearTimeout(address.timer);
    address.timer = window.setTimeout(writeAddress, 250);
  }
  function writeAddress() {
    window.clearTimeout(address.timer);
    address.timer = 0;
    if (address.query === null) return;
    var query = address.query;
    address.query = null;
    if (window.location.search !== '?' + query) {
      window.history.replaceState(null, '', window.location.pathname + '?' + query + window.location.hash);
    }
  }

  // ---- the live loop: every edit recomputes on the next frame ----
  function update(initial) {
    var query = readForm();
    // A change event after the input events of the same edit asks again for the same link: the
    // design on screen (and a study running on it) stays.
    if (!initial && query === state.lastQuery) return null;
    state.lastQuery = query;
    keepAddress(query);
    var t0 = performance.now();
    var view = engine.evaluate(query, !!initial);
    var t1 = performance.now();
    var committed = render(view, initial);
    document.body.setAttribute('data-evaluate-ms', (t1 - t0).toFixed(2));
    document.body.setAttribute('data-render-ms', (performance.now() - t1).toFixed(2));
    if (committed) scheduleStudy();
    return view;
  }
  /* Timing of the last edit, stamped on <body> for the benchmark: from the input event to the
   * end of the redraw (data-edit-ms) and the work of the update alone (data-update-ms).
   *
   * An edit after a quiet spell is worked at once, inside its input event: the canvases then
   * show it at the very next frame. Edits that follow each other within a frame (a held key, a
   * pasted value, the change event after the input events) are gathered into one update on the
   * next animation frame, so the page never works more than once per frame. */
  var FRAME_MS = 1000 / 60;
  var timing = { inputAt: 0, updates: 0, lastEnd: -Infinity };
  function runUpdate() {
    var start = performance.now();
    syncVisibility();
    update(false);
    var end = performance.now();
    timing.updates += 1;
    timing.lastEnd = end;
    document.body.setAttribute('data-update-ms', (end - start).toFixed(2));
    document.body.setAttribute('data-edit-ms', (end - timing.inputAt).toFixed(2));
    document.body.setAttribute('data-updates', String(timing.updates));
    timing.inputAt = 0;
  }
  function schedule() {
    var now = performance.now();
    if (!timing.inputAt) timing.inputAt = now;
    if (state.frame) return;
    if (now - timing.lastEnd >= FRAME_MS) {
      runUpdate();
      return;
    }
    state.frame = window.requestAnimationFrame(function () {
      state.frame = 0;
      runUpdate();
    });
  }

  /* Opens a link: loads what is valid; a field whose value was refused goes back to its default
   * (the value the design used) and the refusal is listed in the notice. The link is first only
   * read (no design is made), then the form's link is composed once; only when that design
   * cannot be made (a value valid alone but not with the rest) do the fields it names go back to
   * their defaults for a second try. */
  function openQuery(search) {
    var params = new URLSearchParams(search);
    // The link as it came is read first, so that its unknown keys and refused values are known.
    var view = engine.check_link(params.toString());
    if (view.refused) {
      params = new URLSearchParams();
    }
    applyQuery(fieldNames(params));
    var refused = view.errors.slice();
    function resetFields(errors) {
      errors.forEach(function (error) {
        var target = fields().filter(function (e) { return e.name === error.key; });
        target.forEach(function (e) {
          if (e.type === 'radio') e.checked = e.defaultChecked;
          else e.value = fieldDefault(e);
        });
        if (error.key === 'set' || error.key.indexOf('set:') === 0) state.overrides = new Map();
      });
    }
    function compose() {
      syncVisibility();
      var query = readForm();
      address.query = query;
      writeAddress();
      state.lastQuery = query;
      return engine.evaluate(query, true);
    }
    resetFields(refused);
    var final = compose();
    if (!final.committed && final.errors.length) {
      resetFields(final.errors);
      refused = refused.concat(final.errors);
      final = compose();
    }
    // What the opened link carried but the design does not use: its unknown keys and notes, and
    // every refused value (the field went back to its default).
    var notes = view.ignored.slice();
    final.ignored.forEach(function (n) { if (notes.indexOf(n) < 0) notes.push(n); });
    refused.forEach(function (e) {
      notes.push(e.key + ': ' + e.message + (view.refused ? ' — the link is not opened' : ' (the default is used)'));
    });
    render(final, false);
    showNotice(notes);
    if (final.committed) scheduleStudy();
  }

  // ---- crosshair readout ----
  function readoutAt(figure, canvas, x, y) {
    var ratio = dpr();
    var line = $('.crosshair', figure);
    var box = $('.readout', figure);
    var r = engine.read_plot(plotOf(canvas), canvas.width, canvas.height, ratio, false, x * ratio, y * ratio);
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

  // ---- tolerance study, in chunks so the page stays responsive ----
  function scheduleStudy() {
    window.clearTimeout(state.studyTimer);
    cancelStudy(true);
    if (!$('#study-auto').checked) return;
    state.studyTimer = window.setTimeout(autoStudy, 350);
  }
  function cancelStudy(quiet) {
    if (state.study) {
      state.study.cancelled = true;
      engine.study_cancel();
      state.study = null;
      if (!quiet) $('#study-status').textContent = 'cancelled';
    }
    $('#study-cancel').disabled = true;
    $('#study-run').disabled = false;
  }
  function autoStudy() {
    if ($('#study-auto').checked) runStudy();
  }
  /* The study works in tasks of about STUDY_TASK_MS: the next amount of work from the last
   * one's (`size` units took `spent` ms), kept within [least, most]. */
  var STUDY_TASK_MS = 8;
  function nextSize(size, spent, least, most) {
    var next = spent > 0.5 ? Math.round(size * STUDY_TASK_MS / spent) : size * 2;
    return Math.max(least, Math.min(most, next));
  }
  /* Posts to `port` from a timer: input and painting get their turn first, and the message hop
   * keeps the browser from stretching chained timers. */
  function soon(port) {
    window.setTimeout(function () { port.postMessage(0); }, 0);
  }

  function runStudy() {
    cancelStudy(true);
    if (state.stale || !state.committed) return;
    var started = engine.study_start();
    if (!started.ok) { $('#study-status').textContent = started.message; return; }
    var job = { cancelled: false, chunk: 64, t0: performance.now() };
    state.study = job;
    $('#study-cancel').disabled = false;
    $('#study-run').disabled = true;
    var bar = $('#study-progress');
    bar.max = started.total;
    bar.value = 0;
    var channel = new MessageChannel();
    channel.port1.onmessage = pump;
    function pump() {
      if (job.cancelled) return;
      var t = performance.now();
      var p = engine.study_step(job.chunk);
      var spent = performance.now() - t;
      // Each chunk aims at a short task, so that input and painting get the rest of every frame.
      job.chunk = nextSize(job.chunk, spent, 8, 20000);
      bar.value = p.done;
      $('#study-status').textContent = p.status;
      if (p.finished) { cancelStudy(true); return; }
      if (p.done >= p.total) {
        // Summarize in short pieces, then the rest in a task of its own, then redraw on the
        // next frame.
        var points = 8;
        var pieces = new MessageChannel();
        var summarize = function () {
          if (job.cancelled) return;
          var t = performance.now();
          var left = engine.study_summarize(points);
          points = nextSize(points, performance.now() - t, 1, 1000);
          if (left > 0) { soon(pieces.port2); return; }
          window.setTimeout(finish, 0);
        };
        var finish = function () {
          if (job.cancelled) return;
          var result = engine.study_finish();
          state.study = null;
          $('#study-cancel').disabled = true;
          $('#study-run').disabled = false;
          $('#study-status').textContent = result.status;
          if (result.summary) $('#summary').textContent = result.summary;
          window.requestAnimationFrame(function () {
            if (job.cancelled) return;
            drawCanvas($('#plot-main'));
            $$('canvas[data-plot^="hist-"], .thumb canvas[data-plot="magnitude"]').forEach(function (canvas) { drawCanvas(canvas); });
            state.studies += 1;
            document.body.setAttribute('data-study-ms', String(Math.round(performance.now() - job.t0)));
            document.body.setAttribute('data-study-done', String(state.studies));
          });
        };
        pieces.port1.onmessage = summarize;
        soon(pieces.port2);
        return;
      }
      soon(channel.port2);
    }
    channel.port2.postMessage(0);
  }

  // ---- outputs ----
  function fileStem() {
    var title = form.elements.title.value.trim();
    var stem = (title || 'rolloff-design').toLowerCase().replace(/[^a-z0-9]+/g, '-').replace(/^-|-$/g, '');
    return stem || 'rolloff-design';
  }
  function download(name, blob) {
    var a = document.createElement('a');
    var url = URL.createObjectURL(blob);
    a.href = url;
    a.download = name;
    document.body.appendChild(a);
    a.click();
    a.remove();
    window.setTimeout(function () { URL.revokeObjectURL(url); }, 1000);
  }
  function status(text) {
    $('#study-status').textContent = text;
  }
  var exportTypes = {
    bom: ['.csv', 'text/csv'],
    spice: ['.cir', 'text/plain'],
    json: ['.json', 'application/json'],
  };
  function exportText(kind) {
    var result = engine.export_text(kind);
    if (!result.ok) { showNotice([result.message]); return; }
    var type = exportTypes[kind];
    download(fileStem() + type[0], new Blob([result.text], { type: type[1] }));
    $('#save-menu').open = false;
  }

  function wire() {
    // The study's fields belong to the form (form="req") but sit outside it, so their events
    // bubble through the study panel instead.
    [form, $('#study-form')].forEach(function (host) {
      host.addEventListener('input', function (event) { if (event.target.name) schedule(); });
      host.addEventListener('change', function (event) { if (event.target.name) schedule(); });
    });
    form.addEventListener('submit', function (e) { e.preventDefault(); });
    $('#example').addEventListener('change', function (event) {
      var value = event.target.value;
      if (!value) return;
      openQuery(value);
      event.target.value = '';
    });
    $$('.thumb').forEach(function (b) {
      b.addEventListener('click', function () { chooseMain(b.getAttribute('data-plot')); });
    });
    $$('figure.plot').forEach(wireReadout);
    $('#copy-link').addEventListener('click', function () {
      writeAddress();
      var href = window.location.href;
      var done = function () { status('link copied'); };
      if (navigator.clipboard && navigator.clipboard.writeText) {
        navigator.clipboard.writeText(href).then(done, function () { status('copy failed: select the address bar'); });
      } else {
        status('copy unavailable: select the address bar');
      }
    });
    $$('[data-export]').forEach(function (b) {
      b.addEventListener('click', function () { exportText(b.getAttribute('data-export')); });
    });
    $('#save-png').addEventListener('click', function () {
      var canvas = $('#plot-main');
      canvas.toBlob(function (blob) { if (blob) download(fileStem() + '-' + state.mainPlot + '.png', blob); }, 'image/png');
      $('#save-menu').open = false;
    });
    $('#import-json').addEventListener('change', function (event) {
      var file = event.target.files && event.target.files[0];
      if (!file) return;
      file.text().then(function (text) {
        var result = engine.import_json(text);
        if (!result.ok) { showNotice(['The file was not opened: ' + result.message]); return; }
        openQuery(result.query);
      });
      event.target.value = '';
    });
    $('#print').addEventListener('click', function () { window.print(); });
    window.addEventListener('beforeprint', function () { writeAddress(); preparePrint(); });
    window.addEventListener('pagehide', writeAddress);
    document.addEventListener('visibilitychange', writeAddress);
    window.addEventListener('afterprint', function () { printing = false; if (state.committed) drawAll(); });
    $('#notice-close').addEventListener('click', function () { $('#notice').hidden = true; });
    $('#study-run').addEventListener('click', runStudy);
    $('#study-cancel').addEventListener('click', function () { cancelStudy(false); });
    $('#study-auto').addEventListener('change', function () {
      if ($('#study-auto').checked) scheduleStudy(); else window.clearTimeout(state.studyTimer);
    });
    if (dark && dark.addEventListener) dark.addEventListener('change', function () { if (state.committed) drawAll(); });
    $$('canvas').forEach(watchCanvas);
  }

  /* The printed report shows every plot at a readable size, not only the one in the large slot. */
  function preparePrint() {
    printing = true;
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
      engine.draw_plot(kind, canvas, false, 2, false);
    });
  }

  // ---- start ----
  function start(core) {
    engine = core;
    recordDefaults();
    wire();
    if (typeof rolloffOpening !== 'undefined') rolloffOpening.started = performance.now();
    openQuery(window.location.search);
    // Time from the start of navigation to the first drawn plot (for the benchmark).
    document.body.setAttribute('data-first-draw-ms', performance.now().toFixed(1));
    if (typeof rolloffOpening !== 'undefined') {
      rolloffOpening.drawn = performance.now();
      document.body.setAttribute('data-opening', JSON.stringify(rolloffOpening));
    }
    document.body.setAttribute('data-ready', '1');
  }
  if (typeof rolloffReady === 'undefined') {
    showDefect('the wasm core (rolloff-wasm.js) is missing: run ./build.sh');
    return;
  }
  rolloffReady.then(start, function (error) { showDefect('the wasm core failed to start: ' + error); });
})();

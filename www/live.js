/* Rolloff page, the live loop: every edit recomputes the design, the address bar carries the
 * core's link for the design on screen, opening a link (the address, an example, a saved file,
 * Back and Forward) fills the form from the core, and the downloads come from the core. */
(function (R) {
  'use strict';
  var $ = R.$, $$ = R.$$, state = R.state;

  /* The address bar carries the link the core wrote for the design on screen. It is written at
   * once after each edit, so a reload finds the latest link (see `leave` for one asked for in the
   * same moment as the edit). Chromium
   * ignores history changes that come faster than about 200 in 10 s, so past ADDRESS_BUDGET writes
   * in ADDRESS_WINDOW_MS (a key held down) the page waits and then writes only the latest link;
   * leaving the page, copying the link or printing writes a pending one at once. Opening an
   * example or a file adds a history entry, so the previous design is one Back away. */
  var ADDRESS_BUDGET = 100;
  var ADDRESS_WINDOW_MS = 10000;
  var address = { timer: 0, query: null, replaced: null, writes: [] };
  function keepAddress(query) {
    address.query = query;
    if (address.timer) return;
    var now = performance.now();
    while (address.writes.length && now - address.writes[0] >= ADDRESS_WINDOW_MS) address.writes.shift();
    if (address.writes.length < ADDRESS_BUDGET) writeAddress();
    else address.timer = window.setTimeout(writeAddress, address.writes[0] + ADDRESS_WINDOW_MS - now);
  }
  function writeAddress(push) {
    window.clearTimeout(address.timer);
    address.timer = 0;
    if (address.query === null) return;
    var query = address.query;
    address.query = null;
    var url = window.location.pathname + query + window.location.hash;
    var replaced = window.location.search;
    if (push === true) window.history.pushState(null, '', url);
    else if (window.location.search !== query) window.history.replaceState(null, '', url);
    else return;
    address.replaced = replaced;
    address.writes.push(performance.now());
    R.showLink();
  }

  // ---- every edit recomputes ----
  function update(initial) {
    var query = R.readForm();
    // A change event after the input events of the same edit asks again for the same link: the
    // design on screen (and a study running on it) stays.
    if (!initial && query === state.lastQuery) return null;
    state.lastQuery = query;
    var t0 = performance.now();
    var view = R.engine.evaluate(query, !!initial);
    var t1 = performance.now();
    var committed = R.render(view, initial);
    if (committed) keepAddress(view.link);
    document.body.setAttribute('data-evaluate-ms', (t1 - t0).toFixed(2));
    document.body.setAttribute('data-render-ms', (performance.now() - t1).toFixed(2));
    if (committed) R.scheduleStudy();
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
    R.syncVisibility();
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
  /* Works an edit still waiting for its frame now, and writes its link: the page is being left
   * or copied from, and the address must hold the design on screen. */
  function flush() {
    if (state.frame) {
      window.cancelAnimationFrame(state.frame);
      state.frame = 0;
      runUpdate();
    }
    writeAddress();
  }
  /* A reload asked for in the same moment as an edit loads the address as it was when the reload
   * was asked for, which may be before the page wrote the edit's link. So when the page is left,
   * the address is kept for this tab (sessionStorage, key prefixed: every file:// page shares one
   * store) beside the address its last write replaced; a reload that finds that older address
   * opens the kept one instead. */
  var RELOAD_KEY = 'rolloff.reload';
  function leave() {
    flush();
    try {
      if (address.replaced !== null && address.replaced !== window.location.search) {
        window.sessionStorage.setItem(RELOAD_KEY, JSON.stringify({ from: address.replaced, to: window.location.search }));
      } else window.sessionStorage.removeItem(RELOAD_KEY);
    } catch (e) { /* storage refused (private mode): the address alone is kept */ }
  }
  /* The link to open at start: the address, or the link kept by `leave` when this is a reload
   * that found the address the edit replaced. */
  function startLink() {
    var search = window.location.search;
    try {
      var kept = JSON.parse(window.sessionStorage.getItem(RELOAD_KEY) || 'null');
      window.sessionStorage.removeItem(RELOAD_KEY);
      var nav = performance.getEntriesByType ? performance.getEntriesByType('navigation')[0] : null;
      if (kept && nav && nav.type === 'reload' && kept.from === search && typeof kept.to === 'string') return kept.to;
    } catch (e) { /* storage refused or unreadable: the address is the link */ }
    return search;
  }

  /* Opens a link: loads what is valid; a value that was refused shows the default the design
   * uses, and the refusal is listed in the notice. A link from a newer version changes nothing:
   * not the form, not the design, not the address. `push` adds a history entry (an example or a
   * file was opened), so the previous design stays one Back away. */
  function openQuery(search, push) {
    var view = R.engine.check_link(search);
    if (view.refused) {
      R.showNotice(view.errors.map(function (e) { return e.key + ': ' + e.message + ' — the link is not opened'; }));
      if (!state.committed) R.setText($('#summary'), 'No design: the link was not opened (see the note above)');
      return false;
    }
    // The design on screen keeps its own history entry: an edit whose link is still waiting is
    // written there before the new entry is added.
    if (push === true) flush();
    var before = state.extra;
    R.applyQuery(search);
    var query = R.readForm();
    state.lastQuery = query;
    var final = R.engine.evaluate(query, true);
    var refused = view.errors.slice();
    if (!final.committed && final.errors.length) {
      // A value valid alone but not with the rest: its field is emptied (the core's default)
      // for a second try.
      R.clearKeys(final.errors);
      refused = refused.concat(final.errors);
      query = R.readForm();
      state.lastQuery = query;
      final = R.engine.evaluate(query, true);
    }
    if (final.committed) {
      address.query = final.link;
      writeAddress(push === true);
    } else {
      state.extra = before;
    }
    // What the opened link carried but the design does not use: its unknown keys and notes, and
    // every refused value (the field shows the default the design uses).
    var notes = view.ignored.slice();
    final.ignored.forEach(function (n) { if (notes.indexOf(n) < 0) notes.push(n); });
    refused.forEach(function (e) { notes.push(e.key + ': ' + e.message + ' (the default is used)'); });
    R.render(final, false);
    R.showNotice(notes);
    if (final.committed) R.scheduleStudy();
    return final.committed;
  }

  // ---- outputs ----
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
  /* Closes the Save menu; focus inside it (now hidden) goes back to its summary. */
  function closeMenu() {
    var menu = $('#save-menu');
    var inside = menu.contains(document.activeElement);
    menu.open = false;
    if (inside) $('summary', menu).focus();
  }
  var exportTypes = {
    bom: ['.csv', 'text/csv'],
    spice: ['.cir', 'text/plain'],
    json: ['.json', 'application/json'],
  };
  function exportText(kind) {
    var result = R.engine.export_text(kind);
    if (!result.ok) { R.showNotice([result.message]); return; }
    var type = exportTypes[kind];
    download(R.fileStem() + type[0], new Blob([result.text], { type: type[1] }));
    closeMenu();
  }

  function wire() {
    var form = R.form;
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
      openQuery(value, true);
      event.target.value = '';
    });
    $$('.thumb').forEach(function (b) {
      b.addEventListener('click', function () { R.chooseMain(b.getAttribute('data-plot')); });
    });
    R.wireCanvases();
    $('#copy-link').addEventListener('click', function () {
      flush();
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
      canvas.toBlob(function (blob) { if (blob) download(R.fileStem() + '-' + state.mainPlot + '.png', blob); }, 'image/png');
      closeMenu();
    });
    $('#save-menu').addEventListener('keydown', function (event) {
      if (event.key !== 'Escape' || !$('#save-menu').open) return;
      event.preventDefault();
      $('#save-menu').open = false;
      $('#save-menu summary').focus();
    });
    $('#import-json').addEventListener('change', function (event) {
      var file = event.target.files && event.target.files[0];
      if (!file) return;
      file.text().then(function (text) {
        var result = R.engine.import_json(text);
        if (!result.ok) { R.showNotice(['The file was not opened: ' + result.message]); return; }
        openQuery(result.query, true);
      });
      event.target.value = '';
    });
    $('#print').addEventListener('click', function () { window.print(); });
    window.addEventListener('beforeprint', function () { flush(); R.preparePrint(); });
    window.addEventListener('afterprint', R.afterPrint);
    window.addEventListener('pagehide', leave);
    window.addEventListener('popstate', function () { openQuery(window.location.search, false); });
    document.addEventListener('visibilitychange', flush);
    $('#notice-close').addEventListener('click', function () { $('#notice').hidden = true; });
    R.wireStudy();
  }

  R.schedule = schedule;
  R.openQuery = openQuery;
  R.startLink = startLink;
  R.wire = wire;
})(window.Rolloff);

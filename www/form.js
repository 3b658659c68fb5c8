/* Rolloff page, the form. Loaded first of the page's scripts, so it also makes the namespace the
 * others share (`Rolloff`: the sheet's state, the wasm core once started, two query helpers).
 *
 * The page is a porch: these scripts read the form, call one export of the wasm core per action,
 * size the canvases and show status. The link's grammar, its defaults and every computation live
 * in Rust; this file only moves text between the form and the core (`form_of_link`,
 * `form_defaults`). Text that can come from a link is only ever set with textContent. */
window.Rolloff = (function () {
  'use strict';
  var R = {};
  R.$ = function (selector, root) { return (root || document).querySelector(selector); };
  R.$$ = function (selector, root) { return Array.prototype.slice.call((root || document).querySelectorAll(selector)); };
  R.engine = null;   // the wasm core (wasm_bindgen), set by main.js once it has started
  R.state = {
    mainPlot: 'magnitude',
    overrides: new Map(),   // part reference → text typed over it
    extra: '',              // the opened link's keys the form has no field for, as the core gave them
    committed: false,       // a design has been drawn at least once
    stale: false,
    frame: 0,
    study: null,            // { cancelled, chunk }
    studyTimer: 0,
    studies: 0,             // finished tolerance studies (stamped on <body> for tests)
    lastQuery: null,        // the link of the design on screen (or of the last refused edit)
    cursor: null,           // keyboard crosshair position (CSS px) on the main plot
  };

  /* Writes a text only when it changed: an unchanged text costs the browser no new layout. */
  R.setText = function (node, text) {
    if (node.textContent !== text) node.textContent = text;
  };

  // A panic in Rust or an exception here is shown on the page, never swallowed. The listeners
  // are added by the first script, so an exception in any later one is shown too.
  R.showDefect = function (text) {
    var box = R.$('#defect');
    box.hidden = false;
    box.textContent = 'Rolloff hit an internal defect, please report it: ' + text;
  };
  window.addEventListener('error', function (event) { R.showDefect(String(event.message || event.error)); });
  window.addEventListener('unhandledrejection', function (event) { R.showDefect(String(event.reason)); });
  return R;
})();

(function (R) {
  'use strict';
  var $ = R.$, $$ = R.$$, state = R.state;
  var form = $('#req');
  R.form = form;

  // ---- the form ⇄ the link ----
  function fields() {
    return Array.prototype.filter.call(form.elements, function (el) { return el.name; });
  }
  /* An empty field leaves its key to the core; its placeholder shows the core's default. */
  function showDefaults() {
    R.engine.form_defaults().forEach(function (pair) {
      fields().forEach(function (el) {
        if (el.name === pair[0] && el.type !== 'radio' && el.tagName !== 'SELECT' && el.type !== 'hidden') el.placeholder = pair[1];
      });
    });
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

  /* The form's names, for the core to tell which link keys the form has no field for. */
  function formKeys() {
    var names = [];
    fields().forEach(function (el) { if (el.name !== 'ordermode' && names.indexOf(el.name) < 0) names.push(el.name); });
    names.push('set');
    return names.join(',');
  }
  function isShown(el) {
    return !el.closest('[hidden]');
  }

  /* The form as a query string for the core: every shown field that holds a value (an empty field
   * leaves the key to the core, which knows its default), the parts typed over, and the keys of
   * the opened link that the form has no field for (kept as the core gave them). No key is left
   * out for equalling a default, and the link written to the address bar is the core's. */
  function readForm() {
    var params = new URLSearchParams();
    var mode = radioValue('ordermode');
    var seen = {};
    fields().forEach(function (el) {
      var name = el.name;
      if (name === 'ordermode' || seen[name]) return;
      if (el.type === 'radio') {
        seen[name] = true;
        var value = radioValue(name);
        if (value) params.set(name, value);
        return;
      }
      if (!isShown(el)) return;
      var text = el.value.trim();
      if (name === 'order' && mode !== 'fixed') return;
      if (text) params.set(name, text);
    });
    if (state.overrides.size) {
      var list = [];
      state.overrides.forEach(function (text, ref) { list.push(ref + ':' + text); });
      params.set('set', list.join(','));
    }
    var query = params.toString();
    return state.extra ? (query ? query + '&' : '') + state.extra : query;
  }

  /* Puts a link into the form, as the core reads it: each field shows the core's text for the
   * link's state, an absent key leaves its field empty, and the keys without a field are kept. */
  function applyQuery(search) {
    var fill = R.engine.form_of_link(search, formKeys());
    fields().forEach(function (el) {
      if (el.type === 'radio') el.checked = el.defaultChecked;
      else if (el.tagName === 'SELECT') {
        var chosen = Array.prototype.find.call(el.options, function (o) { return o.defaultSelected; });
        el.value = chosen ? chosen.value : (el.options[0] ? el.options[0].value : '');
      } else el.value = '';
    });
    state.overrides = new Map();
    fill.overrides.forEach(function (pair) { state.overrides.set(pair[0], pair[1]); });
    fill.values.forEach(function (pair) {
      var key = pair[0], value = pair[1];
      var els = fields().filter(function (el) { return el.name === key; });
      if (!els.length) return;
      if (els[0].type === 'radio') { setRadio(key, value); return; }
      els[0].value = value;
    });
    state.extra = fill.extra;
    setRadio('ordermode', fill.order_mode);
    if (fill.converter) $('#converter').open = true;
    var titleBox = $('#design-title');
    titleBox.hidden = !fill.title;
    titleBox.textContent = fill.title || '';
    syncVisibility();
  }

  /* Empties the fields of these keys (the core's default then applies) and, for a part key, drops
   * the parts typed over: how opening a link retries without a value valid alone but not with
   * the rest. */
  function clearKeys(errors) {
    errors.forEach(function (error) {
      fields().filter(function (e) { return e.name === error.key; }).forEach(function (e) {
        if (e.type !== 'radio' && e.tagName !== 'SELECT') e.value = '';
      });
      if (error.key === 'set' || error.key.indexOf('set:') === 0) state.overrides = new Map();
    });
  }

  function syncVisibility() {
    var values = { resp: radioValue('resp'), ordermode: radioValue('ordermode'), family: form.elements.family.value };
    $$('[data-show]', form).forEach(function (el) {
      var hidden = !el.getAttribute('data-show').split('&').every(function (rule) {
        // `key=a|b`: shown when the key has any of the listed values.
        var pair = rule.split('=');
        return pair[1].split('|').indexOf(values[pair[0]]) >= 0;
      });
      if (el.hidden !== hidden) el.hidden = hidden;
    });
    $$('[data-text-resp]', form).forEach(function (el) {
      // `a|b:First|Other`: the first text when the response is one of a, b.
      var parts = el.getAttribute('data-text-resp').split(':');
      var texts = parts[1].split('|');
      R.setText(el, parts[0].split('|').indexOf(values.resp) >= 0 ? texts[0] : texts[1]);
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
  function dropMessage(box) {
    box.classList.remove('bad');
    $$('.msg', box).forEach(function (m) { m.remove(); });
    $$('[aria-invalid]', box).forEach(function (i) { i.removeAttribute('aria-invalid'); i.removeAttribute('aria-describedby'); });
  }
  /* Each error's message goes beneath its own field, linked to the input by aria-describedby.
   * The message is an alert, so a screen reader announces it when it appears; a message that
   * stays the same from one keystroke to the next is left in place, so it is announced once.
   * Returns the errors that have no field on the page. */
  function showMessages(errors) {
    var loose = [];
    var wanted = new Map();   // box → { input, key, messages }
    errors.forEach(function (error) {
      var target = fieldBox(error.key);
      if (!target) { loose.push(error); return; }
      if (!wanted.has(target.box)) wanted.set(target.box, { input: target.input, key: error.key, messages: [] });
      wanted.get(target.box).messages.push(error.message);
    });
    $$('.field.bad, td.value.bad').forEach(function (box) {
      var want = wanted.get(box);
      var shown = $$('.msg', box).map(function (m) { return m.textContent; });
      if (want && shown.join('\n') === want.messages.join('\n')) { wanted.delete(box); return; }
      dropMessage(box);
    });
    wanted.forEach(function (want, box) {
      box.classList.add('bad');
      var ids = want.messages.map(function (message, i) {
        var msg = document.createElement('span');
        msg.className = 'msg';
        msg.id = 'msg-' + want.key.replace(/[^A-Za-z0-9_-]/g, '_') + (i ? '-' + i : '');
        msg.setAttribute('role', 'alert');
        msg.textContent = message;
        box.appendChild(msg);
        return msg.id;
      });
      if (want.input) {
        want.input.setAttribute('aria-invalid', 'true');
        want.input.setAttribute('aria-describedby', ids.join(' '));
      }
    });
    return loose;
  }

  /* The file name stem of a download: the design's title, or a generic name. */
  function fileStem() {
    var title = form.elements.title.value.trim();
    var stem = (title || 'rolloff-design').toLowerCase().replace(/[^a-z0-9]+/g, '-').replace(/^-|-$/g, '');
    return stem || 'rolloff-design';
  }

  R.showDefaults = showDefaults;
  R.readForm = readForm;
  R.applyQuery = applyQuery;
  R.clearKeys = clearKeys;
  R.syncVisibility = syncVisibility;
  R.showMessages = showMessages;
  R.fileStem = fileStem;
})(window.Rolloff);

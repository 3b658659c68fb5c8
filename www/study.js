/* Rolloff page, the tolerance study: the core runs it in chunks of about STUDY_TASK_MS, each in a
 * task of its own, so typing and painting get their turn and the page never freezes; then its
 * summary in short pieces, then the finished figures. */
(function (R) {
  'use strict';
  var $ = R.$, state = R.state;

  function scheduleStudy() {
    window.clearTimeout(state.studyTimer);
    cancelStudy(true);
    if (!$('#study-auto').checked) return;
    state.studyTimer = window.setTimeout(autoStudy, 350);
  }
  function cancelStudy(quiet) {
    if (state.study) {
      state.study.cancelled = true;
      R.engine.study_cancel();
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
    var started = R.engine.study_start();
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
      var p = R.engine.study_step(job.chunk);
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
          var left = R.engine.study_summarize(points);
          points = nextSize(points, performance.now() - t, 1, 1000);
          if (left > 0) { soon(pieces.port2); return; }
          window.setTimeout(finish, 0);
        };
        var finish = function () {
          if (job.cancelled) return;
          var result = R.engine.study_finish();
          state.study = null;
          $('#study-cancel').disabled = true;
          $('#study-run').disabled = false;
          $('#study-status').textContent = result.status;
          if (result.summary) $('#summary').textContent = result.summary;
          window.requestAnimationFrame(function () {
            if (job.cancelled) return;
            R.drawStudy();
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

  /* The study panel's own controls: run, cancel, and whether each change reruns it. */
  function wireStudy() {
    $('#study-run').addEventListener('click', runStudy);
    $('#study-cancel').addEventListener('click', function () { cancelStudy(false); });
    $('#study-auto').addEventListener('change', function () {
      if ($('#study-auto').checked) scheduleStudy(); else window.clearTimeout(state.studyTimer);
    });
  }

  R.scheduleStudy = scheduleStudy;
  R.wireStudy = wireStudy;
})(window.Rolloff);

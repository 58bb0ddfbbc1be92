"""The watch page: one HTML file, its style sheet and its script, all served by simkit itself.

The page asks ``state?after=N`` and the server answers when the state has moved past version N
(or after a while with nothing new), so the page follows every change at once: the stage and
elapsed time of a run, its figures (with the change since the last good run), the verdict
counts, the report (in a frame), and a design-file error above the last good figures.  Every
text from the server goes in with ``textContent``, never as markup: a design's title cannot
inject anything.  No file from anywhere else: no fonts, no libraries, no network.
"""

from __future__ import annotations

from simkit.safety import CAUTION_POINTS

PAGE = """<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>simkit watch</title>
<link rel="stylesheet" href="page.css">
<script src="page.js" defer></script>
</head>
<body>
<header>
  <h1 id="title">simkit watch</h1>
  <p id="file"></p>
</header>
<section id="status" data-status="starting" aria-live="polite">
  <p><span id="status-word">starting</span> <span id="stage"></span> <span id="elapsed"></span></p>
  <ol id="stages"></ol>
  <p id="detail"></p>
</section>
<section id="error" hidden>
  <h2 id="error-title">The design file has an error</h2>
  <pre id="error-text"></pre>
  <p id="error-keep"></p>
</section>
<section id="summary" hidden>
  <h2>Figures <span id="result-run"></span></h2>
  <p id="verdicts"></p>
  <ul id="warnings"></ul>
  <table id="figures">
    <thead><tr><th>figure</th><th>value</th><th>change since the last good run</th><th>meaning</th></tr></thead>
    <tbody></tbody>
  </table>
</section>
<section id="report-section" hidden>
  <h2>Report <span id="report-run"></span></h2>
  <p id="report-files"></p>
  <iframe id="report" title="the design report"></iframe>
</section>
<footer>
  <p><strong>High voltage.</strong> __CAUTIONS__</p>
  <p>Served by simkit on this computer only; stop it with Ctrl-C where it runs.</p>
</footer>
</body>
</html>
"""

CSS = """
:root { --ink: #1d232b; --muted: #5b6570; --line: #e1e6ec; --blue: #1f3b73; --brick: #b5452b; --green: #3f7f4f;
        --amber: #d98c1f; --shade: #eef1f6; }
body { font-family: "DejaVu Sans", Verdana, sans-serif; color: var(--ink); margin: 1.5em auto; max-width: 70em;
       padding: 0 1em; font-size: 15px; line-height: 1.4; }
h1 { font-size: 1.5em; margin: 0; } h2 { font-size: 1.15em; margin: 1.2em 0 0.4em; }
header p { color: var(--muted); margin: 0.2em 0 0; }
#status { border-left: 4px solid var(--muted); padding: 0.3em 0.8em; margin: 1em 0; background: var(--shade); }
#status[data-status="running"] { border-color: var(--amber); }
#status[data-status="ready"] { border-color: var(--green); }
#status[data-status="error"] { border-color: var(--brick); }
#status p { margin: 0.2em 0; } #status-word { font-weight: bold; } #elapsed, #detail { color: var(--muted); }
#stages { list-style: none; padding: 0; margin: 0.3em 0; display: flex; gap: 1.2em; flex-wrap: wrap; }
#stages li { color: var(--muted); } #stages li.done { color: var(--green); }
#stages li.now { color: var(--ink); font-weight: bold; }
#stages li.done::before { content: "\\2713  "; } #stages li.now::before { content: "\\25B6  "; }
#error { border: 2px solid var(--brick); padding: 0.4em 1em; background: #fbf0ed; }
#error pre { white-space: pre-wrap; font-size: 0.95em; }
table { border-collapse: collapse; width: 100%; }
th, td { border-bottom: 1px solid var(--line); padding: 0.25em 0.6em; text-align: left; vertical-align: top; }
td.value, td.change { text-align: right; white-space: nowrap; font-variant-numeric: tabular-nums; }
td.meaning { color: var(--muted); }
tr.changed td.value { font-weight: bold; }
#verdicts { font-weight: bold; }
iframe { width: 100%; height: 80vh; border: 1px solid var(--line); }
footer { color: var(--muted); font-size: 0.9em; margin-top: 2em; border-top: 1px solid var(--line); }
"""

SCRIPT = r"""
'use strict';
(function () {
  var version = -1, received = 0, runElapsed = null, reportShown = -1;
  function el(id) { return document.getElementById(id); }
  function text(id, value) { el(id).textContent = value == null ? '' : String(value); }
  function clear(node) { while (node.firstChild) { node.removeChild(node.firstChild); } }
  function cell(row, cls, value) {
    var td = document.createElement('td'); td.className = cls; td.textContent = value == null ? '' : String(value);
    row.appendChild(td); return td;
  }
  function tick() {
    if (runElapsed !== null) {
      var s = runElapsed + (performance.now() - received) / 1000;
      text('elapsed', 'elapsed ' + s.toFixed(1) + ' s');
    }
  }
  function renderRun(state) {
    var run = state.run, box = el('status'), list = el('stages');
    box.setAttribute('data-status', state.status);
    clear(list);
    if (run) {
      text('status-word', 'running (run ' + run.number + '):');
      var reached = false;
      run.stages.forEach(function (s) {
        var li = document.createElement('li'); li.textContent = s.words; li.setAttribute('data-stage', s.key);
        if (s.key === run.stage) { li.className = 'now'; reached = true; text('stage', s.words); }
        else if (!reached) { li.className = 'done'; }
        list.appendChild(li);
      });
      text('detail', run.detail); runElapsed = run.elapsed_s; tick();
    } else {
      runElapsed = null; text('stage', ''); text('detail', '');
      var r = state.result;
      if (state.status === 'error') {
        var when = state.error ? ' (run ' + state.error.run + ', ' + state.error.at + ')' : '';
        text('status-word', 'the last run failed' + when);
        text('elapsed', '');
      }
      else if (r) {
        text('status-word', 'up to date:');
        text('elapsed', 'run ' + r.number + ' finished at ' + r.finished +
             (r.seconds != null ? ' in ' + r.seconds + ' s' : '') + '; edit and save the design file to run it again');
      } else { text('status-word', state.status); text('elapsed', ''); }
    }
  }
  function renderError(state) {
    var box = el('error'), e = state.error;
    box.hidden = !e;
    if (!e) { return; }
    text('error-title', e.kind === 'design' ? 'The design file has an error' :
                        e.kind === 'simulation' ? 'The simulation could not be completed' : 'simkit failed');
    text('error-text', e.message);
    text('error-keep', state.result ? 'Showing the last good result below (run ' + state.result.number + ', ' +
         state.result.finished + '); fix the file and save it to run again.' :
         'Fix the file and save it to run again.');
  }
  function renderResult(state) {
    var r = state.result;
    el('summary').hidden = !r;
    if (!r) { return; }
    text('title', r.title); document.title = r.title + ' - simkit watch';
    text('result-run', '(run ' + r.number + ')');
    var body = el('figures').tBodies[0];
    clear(body);
    r.figures.forEach(function (f) {
      var tr = document.createElement('tr'); tr.setAttribute('data-figure', f.name);
      if (f.change) { tr.className = 'changed'; }
      var code = document.createElement('code'); code.textContent = f.name;
      var name = cell(tr, 'name', ''); name.appendChild(code);
      var v = cell(tr, 'value', f.shown); if (f.value != null) { v.setAttribute('data-value', String(f.value)); }
      cell(tr, 'change', f.change); cell(tr, 'meaning', f.meaning);
      body.appendChild(tr);
    });
    var v = r.verdicts;
    text('verdicts', v ? 'checks: ' + v.result + ' (' + v.pass + ' pass, ' + v.marginal + ' marginal, ' +
                         v.fail + ' fail)' :
                     (r.check_error ? 'checks could not be completed: ' + r.check_error : 'checks: running'));
    var ul = el('warnings'); clear(ul);
    r.warnings.forEach(function (w) {
      var li = document.createElement('li'); li.textContent = 'warning: ' + w; ul.appendChild(li);
    });
  }
  function renderReport(state) {
    var rep = state.report;
    el('report-section').hidden = !rep;
    if (!rep || rep.number === reportShown) { return; }
    reportShown = rep.number;
    text('report-run', '(run ' + rep.number + ')');
    el('report').setAttribute('src', 'files/report.html?run=' + rep.number);
    var p = el('report-files'); clear(p);
    p.appendChild(document.createTextNode('Files: '));
    rep.files.forEach(function (name, i) {
      if (i) { p.appendChild(document.createTextNode(', ')); }
      var a = document.createElement('a'); a.href = 'files/' + encodeURIComponent(name) + '?run=' + rep.number;
      a.textContent = name; p.appendChild(a);
    });
  }
  function render(state) {
    version = state.version; received = performance.now();
    text('file', state.design.file);
    if (state.design.title) { text('title', state.design.title); }
    renderRun(state); renderError(state); renderResult(state); renderReport(state);
  }
  function poll() {
    fetch('state?after=' + version, {cache: 'no-store'}).then(function (r) {
      if (!r.ok) { throw new Error('HTTP ' + r.status); }
      return r.json();
    }).then(function (state) { render(state); poll(); }).catch(function () {
      el('status').setAttribute('data-status', 'error');
      text('status-word', 'simkit watch is not answering (stopped?); trying again');
      runElapsed = null; text('elapsed', '');
      setTimeout(poll, 2000);
    });
  }
  setInterval(tick, 200);
  poll();
})();
"""


def page_html() -> str:
    """The page, with the high-voltage cautions written in (escaped: they are plain text)."""
    import html

    return PAGE.replace("__CAUTIONS__", html.escape(" ".join(CAUTION_POINTS)))

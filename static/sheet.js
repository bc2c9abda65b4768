// ringwise design sheet: sends the form to the API and renders what comes back.
// It computes nothing of its own: every number, text and curve is the server's.
// One map of selectors, one of events; no framework, no build step.

import { jobRunners } from "./jobs.js";

const SEL = {
  form: "#design-form",
  outcome: ".outcome",
  figures: ".outcome [data-field]:not([data-field='warnings']), .stability-panel dd[data-field]",
  stressRows: "[data-role='stress-rows']",
  sourceRows: "[data-role='source-rows']",
  noiseMethod: "[data-role='noise-method']",
  verdict: ".verdict",
  verdictLabel: "[data-role='verdict-label']",
  glyph: ".verdict .glyph use",
  warnings: "[data-field='warnings']",
  problems: "[data-role='problems']",
  importProblems: "[data-role='import-problems']",
  schematics: ".schematic-wrap",
  labels: ".schematic [data-label]",
  switched: ".schematic [data-on]",
  feeds: ".schematic [data-feed]",
  sweepParam: "#sweep-param",
  handFormula: "[data-role='hand-formula']",
  pageState: "[data-link]",
  share: "#share-url",
  copy: "#copy-link",
  exportLink: "#export-link",
  summaryLink: "#summary-link",
  importFile: "#import-file",
  status: "#tool-status",
  config: "#ringwise-config",
  initial: "#ringwise-view",
  plots: {
    loop: "#plot-loop",
    sweep: "#plot-sweep",
    reactance: "#plot-reactance",
    budget: "#plot-budget",
    noise: "#plot-noise",
    tuning: "#plot-tuning",
    wave: "#plot-wave",
    envelope: "#plot-envelope",
    spectrum: "#plot-spectrum",
    f_hist: "#plot-f-hist",
    gain_hist: "#plot-gain-hist",
    sensitivity: "#plot-sens",
    temperature: "#plot-temp",
  },
  run: {
    panel: "[data-role='run']",
    cycles: "#run-cycles",
    start: "#run-start",
    stop: "#run-stop",
    progress: "#run-progress",
    status: "#run-status",
    error: "#run-error",
    stale: ".run-stale",
    body: ".run-body",
    figures: ".run-figures [data-field]",
    notes: "[data-field='transient.notes']",
    warnings: "[data-field='run.warnings']",
    node: "[data-role='run-node']",
  },
};

const EVENTS = {
  rendered: "ringwise:rendered", // results, indicator, schematic and plots a, c, d drawn
  swept: "ringwise:swept", // the what-if plot drawn
  steady: "ringwise:steady", // the steady-state answer rendered (verdict, swing, stability)
  ran: "ringwise:ran", // a time-domain run ended (detail.state: done, cancelled, failed)
  tool: "ringwise:tool", // an on-demand panel answered (detail.tool: spread, snap, synth, bench; detail.state)
};

const API = {
  sheet: "/api/sheet",
  sweep: "/api/sheet/sweep",
  steady: "/api/sheet/steady",
  importFile: "/api/import",
  jobs: "/api/simulate/jobs",
  spread: "/api/sheet/spread",
  snap: "/api/sheet/snap",
  synth: "/api/sheet/synthesize",
  bench: "/api/sheet/reconcile",
};
// Typing recomputes on a pause (never on a half-typed value such as "2" of "262"),
// at once on Enter or on leaving the field; a slider step or a choice at once,
// a drag coalesced to one request per SLIDER_MS (older requests are aborted).
const TYPING_PAUSE_MS = 450;
const SLIDER_MS = 30;
// While a slider moves, the figures follow it but the plots wait until it rests this
// long: a plot's redraw is the page's longest task, and a drag must not queue them.
const SLIDER_REST_MS = 200;
const PRESET_FIELDS = ["beta", "IS", "VA", "fT", "C_mu"];

const $ = (sel, root = document) => root.querySelector(sel);
const $$ = (sel, root = document) => Array.from(root.querySelectorAll(sel));
const form = $(SEL.form);
const config = JSON.parse($(SEL.config).textContent);

const state = { mainSeq: 0, sweepSeq: 0, main: null, sweep: null, steady: null, timer: 0, inputAt: 0, view: null, whatIfChosen: false, sent: null, again: false, slid: false };
// The time-domain run: the job being polled, and the query of the design it ran on.
const run = { id: null, timer: 0, query: null, seq: 0, done: null };

// ---- the form and the link -------------------------------------------------

function formTexts() {
  const texts = {};
  for (const el of form.elements) if (el.name) texts[el.name] = el.value;
  return texts;
}

function query(texts) {
  const q = new URLSearchParams();
  for (const [name, text] of Object.entries(texts)) if (text !== "") q.append(name, text);
  return q.toString();
}

// The page's state beside the design (the what-if choice once the user made it,
// the panels' inputs as typed): carried by the link and the summary's link.
function pageState() {
  const q = new URLSearchParams();
  for (const el of $$(SEL.pageState)) {
    const name = el.dataset.link;
    if (name === "what_if" ? !state.whatIfChosen : el.value === initialValue(el)) continue;
    q.append(name, el.value);
  }
  return q.toString();
}

function initialValue(el) {
  if (el.tagName !== "SELECT") return el.defaultValue;
  const option = Array.from(el.options).find((o) => o.defaultSelected) || el.options[0];
  return option ? option.value : "";
}

function applyPageState() {
  const given = new URLSearchParams(location.search);
  for (const el of $$(SEL.pageState)) {
    const text = given.get(el.dataset.link);
    if (text === null) continue;
    if (el.tagName === "SELECT" && !Array.from(el.options).some((o) => o.value === text)) continue;
    el.value = text;
    if (el.dataset.link === "what_if") state.whatIfChosen = true;
  }
}

function updateLinks(texts = formTexts()) {
  const q = query(texts);
  const withState = [q, pageState()].filter((part) => part).join("&");
  history.replaceState(null, "", withState ? `/?${withState}` : "/");
  $(SEL.share).value = `${location.origin}/?${withState}`;
  $(SEL.exportLink).href = `/api/export?${q}`;
  // a finished run goes to the summary by its id; the server shows it only if it ran this design
  const ran = run.done ? `&run=${encodeURIComponent(run.done)}` : "";
  $(SEL.summaryLink).href = `/summary?${withState}${ran}`;
  csvLinks(q);
}

// CSV downloads: each plot's data for the design in the link (the server writes the file).
function csvLinks(q) {
  for (const a of $$("a[data-csv]")) {
    const sweep = a.dataset.csv === "sweep" && $(SEL.sweepParam).value ? `&sweep_param=${encodeURIComponent($(SEL.sweepParam).value)}` : "";
    a.href = `/api/csv/sheet/${a.dataset.csv}?${q}${sweep}`;
  }
}

function setField(name, text) {
  const el = form.elements.namedItem(name);
  if (!el) return;
  if (el.tagName === "SELECT" && !Array.from(el.options).some((o) => o.value === text)) {
    el.add(new Option(`${text} (not known)`, text));
  }
  el.value = text;
}

// ---- talking to the server -------------------------------------------------

async function post(url, body, signal) {
  const response = await fetch(url, {
    method: "POST",
    headers: { "Content-Type": "application/json" },
    body: JSON.stringify(body),
    signal,
  });
  const data = await response.json();
  if (!response.ok) throw Object.assign(new Error(data.message), { body: data });
  return data;
}

// Typing waits for a pause (each keystroke restarts the wait); a slider drag sends
// at most one step per SLIDER_MS (the newest texts when the time comes).
function schedule(wait, throttle = false) {
  state.inputAt = performance.now();
  const texts = formTexts();
  updateLinks(texts);
  if (throttle && state.timer && state.throttled) return;
  clearTimeout(state.timer);
  state.throttled = throttle;
  state.timer = setTimeout(recompute, wait);
}

function commit() {
  clearTimeout(state.timer);
  // Enter fires both submit and change: the same texts are not sent twice
  if (state.sent === query(formTexts())) return;
  state.inputAt = performance.now();
  recompute(); // sends the request before the links are rewritten (they are not waited for)
  updateLinks();
}

// One sheet request at a time.  The server finishes a request whether or not the
// page still waits for it (aborting frees the page, not the server), so an edit
// made meanwhile waits for the answer and then goes, with the newest texts: a
// slider drag never piles requests up on the server.  An answer overtaken by an
// edit is dropped, except during a drag, where it is shown (the sheet follows the
// slider) without the what-if plot and the steady state, which only the newest
// answer asks for.
async function recompute() {
  clearTimeout(state.timer);
  state.timer = 0;
  if (state.main) {
    state.again = true;
    return;
  }
  const seq = ++state.mainSeq;
  const inputAt = state.inputAt;
  state.again = false;
  state.slid = false;
  state.sweep?.abort();
  state.steady?.abort();
  state.main = new AbortController();
  const texts = formTexts();
  state.sent = query(texts);
  $(SEL.outcome).dataset.state = "busy";
  let view;
  try {
    view = await post(API.sheet, { fields: texts, sweep_param: $(SEL.sweepParam).value || null, figures: plotsOnScreen() }, state.main.signal);
  } catch (err) {
    state.sent = null; // not answered: the same texts may be sent again
    if (err.name !== "AbortError" && !state.again) status(`Not computed: ${err.message}`);
  } finally {
    state.main = null;
  }
  if (state.again) {
    if (view && state.slid) {
      render(view);
      $(SEL.outcome).dataset.state = "busy";
    }
    recompute();
    return;
  }
  if (!view) return;
  // the what-if sweep once this answer has come: the server builds it while the page
  // draws (asked beside the sheet's request it would share the server's interpreter
  // lock with it: the sheet's answer 8-10 ms later); the steady state once the sweep
  // has answered (both at once would share the server and slow the sweep)
  const steady = view.ok && view.result.steady_state === null;
  const afterSweep = () => steady && seq === state.mainSeq && !state.main && requestSteady(texts, seq, inputAt);
  if (view.ok) requestSweep(texts, view, inputAt, afterSweep);
  render(view);
  if (steady) $(SEL.outcome).dataset.steady = "pending";
  await plotsDrawn();
  if (seq !== state.mainSeq) return;
  document.dispatchEvent(new CustomEvent(EVENTS.rendered, { detail: { seq, inputAt, at: performance.now(), query: view.query } }));
}

// The small-signal answer is shown first; the steady state follows on a second
// request, sent once the what-if sweep has answered (the two would share the
// server).  An edit in between aborts it (its answer would be for an older design).
async function requestSteady(texts, seq, inputAt) {
  state.steady?.abort();
  state.steady = new AbortController();
  $(SEL.outcome).dataset.steady = "pending";
  try {
    const view = await post(API.steady, { fields: texts, sweep_param: $(SEL.sweepParam).value || null }, state.steady.signal);
    if (seq !== state.mainSeq) return;
    render(view);
    $(SEL.outcome).dataset.steady = "done";
    document.dispatchEvent(new CustomEvent(EVENTS.steady, { detail: { seq, inputAt, at: performance.now() } }));
  } catch (err) {
    if (err.name !== "AbortError" && seq === state.mainSeq) status(`Steady state not computed: ${err.message}`);
  }
}

// answered() is called once the server has answered (or failed), before the plot is drawn.
async function requestSweep(texts, view, inputAt, answered = () => {}) {
  const seq = ++state.sweepSeq;
  state.sweep?.abort();
  state.sweep = new AbortController();
  const startup = view.result.startup;
  const param = view.sweep_param;
  const hint = param === startup.threshold_param ? startup.threshold_value : null;
  try {
    let data;
    try {
      data = await post(API.sweep, { fields: texts, param, threshold_hint: hint }, state.sweep.signal);
    } finally {
      answered();
    }
    if (seq !== state.sweepSeq || !data.ok) return;
    plotFigure("sweep", data.figure);
    await plotsDrawn();
    if (seq !== state.sweepSeq) return;
    document.dispatchEvent(new CustomEvent(EVENTS.swept, { detail: { seq, inputAt, at: performance.now() } }));
  } catch (err) {
    if (err.name !== "AbortError") status(`What-if plot not computed: ${err.message}`);
  }
}

function status(text) {
  $(SEL.status).textContent = text;
}

// ---- rendering -------------------------------------------------------------

// Each input's elements, looked up once (the form never changes): its echo of the
// value, its error line, the input and its slider.
const fieldEls = new Map();
function fieldElements(name) {
  if (!fieldEls.has(name)) {
    fieldEls.set(name, { shown: $(`[data-shown="${name}"]`), error: $(`[data-error="${name}"]`), input: form.elements.namedItem(name), ladder: $(`[data-ladder="${name}"]`) });
  }
  return fieldEls.get(name);
}

// Text and attributes are written only when they change: a write the page does not
// need still makes the browser lay the page out again.
function setText(el, text) {
  if (el.textContent !== text) el.textContent = text;
}

function render(view) {
  state.view = view;
  for (const [name, f] of Object.entries(view.fields)) {
    const { shown, error, input, ladder } = fieldElements(name);
    if (shown) setText(shown, f.display);
    setText(error, f.error || "");
    if (error.hidden !== !f.error) error.hidden = !f.error;
    if (f.error) input.setAttribute("aria-invalid", "true");
    else if (input.hasAttribute("aria-invalid")) input.removeAttribute("aria-invalid");
    if (ladder && f.step !== null && ladder !== document.activeElement && ladder.value !== String(f.step)) ladder.value = f.step;
  }
  const idle = config.idle[view.idle_key] || [];
  for (const field of $$("[data-input]")) field.classList.toggle("idle", idle.includes(field.dataset.input));
  renderProblems(view.problems.filter((p) => !p.input));
  renderSchematic(view);
  $(SEL.outcome).dataset.state = view.ok ? "fresh" : "stale";
  const exportLink = $(SEL.exportLink);
  exportLink.setAttribute("aria-disabled", view.ok ? "false" : "true");
  exportLink.title = view.ok ? "" : "Fix the marked fields to export";
  if (!view.ok) return;
  for (const panel of $$("[data-panel]")) {
    if (panel.dataset.panel in view.result) panel.hidden = view.result[panel.dataset.panel] === null;
  }
  for (const el of $$(SEL.figures)) {
    const figure = view.shown[el.dataset.field];
    if (!figure) continue;
    if (el.dataset.value !== figure.raw) el.dataset.value = figure.raw;
    if (!el.classList.contains("verdict")) setText(el, figure.text);
    if ("hidden" in figure && el.hidden !== figure.hidden) el.hidden = figure.hidden;
  }
  renderStress(view);
  markRunStale(view);
  markToolsStale(view);
  const verdict = view.shown["verdict"];
  $(SEL.verdictLabel).textContent = verdict.text;
  $(SEL.verdict).dataset.icon = verdict.icon;
  // the small-signal verdict beside the one verdict, unless it says the same
  for (const el of $$(".verdict-start, .verdict [data-field='startup.verdict']")) el.hidden = verdict.value === "wont-start";
  $(SEL.glyph).setAttribute("href", `#glyph-${verdict.icon}`);
  $(SEL.glyph).parentElement.setAttribute("aria-label", verdict.icon);
  const list = $(SEL.warnings);
  list.replaceChildren(...(view.result.warnings.length ? view.result.warnings.map(warningItem) : [noneItem()]));
  renderSweepOptions(view);
  setText($(SEL.handFormula), view.budget_caption);
  for (const [name, figure] of Object.entries(view.figures)) plotFigure(name, figure);
  // a plot off screen when the edit was sent: its figure comes with the steady state
  for (const name of config.figures) if (!(name in view.figures)) markStale(SEL.plots[name]);
}

function cell(tag, text, field) {
  const el = document.createElement(tag);
  el.textContent = text;
  if (field) {
    const figure = state.view.shown[field];
    el.dataset.field = field;
    el.dataset.value = figure ? figure.raw : "";
    el.textContent = figure ? figure.text : "—";
  }
  return el;
}

function renderStress(view) {
  const rows = view.part_rows.map((row) => {
    const tr = document.createElement("tr");
    tr.dataset.part = row.part;
    if (row.close) tr.className = "close";
    const head = cell("th", row.part);
    head.scope = "row";
    tr.append(head, cell("td", "", `${row.prefix}.I_rms`), cell("td", "", `${row.prefix}.V_peak`), cell("td", row.rating), cell("td", row.share), cell("td", "", `${row.prefix}.P`));
    return tr;
  });
  $(SEL.stressRows).replaceChildren(...rows);
  const sources = (view.source_rows || []).map((row) => {
    const tr = document.createElement("tr");
    const head = cell("th", row.name);
    head.scope = "row";
    tr.append(head, cell("td", row.share_1k), cell("td", row.share_100k));
    return tr;
  });
  $(SEL.sourceRows).replaceChildren(...sources);
  $(SEL.noiseMethod).textContent = view.result.stability.method || NO_NOISE_METHOD;
}

function warningItem(w) {
  const li = document.createElement("li");
  li.dataset.code = w.code;
  li.textContent = w.message;
  return li;
}

function noneItem() {
  const li = document.createElement("li");
  li.className = "none";
  li.textContent = "none";
  return li;
}

function problemItem(p) {
  const li = document.createElement("li");
  const code = document.createElement("code");
  code.textContent = p.field;
  li.append(code, `: ${p.message}`);
  return li;
}

function renderProblems(problems, sel = SEL.problems) {
  const box = $(sel);
  $("ul", box).replaceChildren(...problems.map(problemItem));
  box.hidden = problems.length === 0;
}

function renderSchematic(view) {
  const shownTopology = config.idle[view.idle_key] ? view.topology : "common-emitter";
  for (const wrap of $$(SEL.schematics)) wrap.hidden = wrap.dataset.topology !== shownTopology;
  for (const label of $$(SEL.labels)) {
    const f = view.fields[label.dataset.label];
    label.textContent = (label.dataset.prefix || "") + (f.display && !f.error ? f.display : f.text);
  }
  for (const part of $$(SEL.switched)) {
    part.dataset.on = view.fields[part.dataset.part].value !== null ? "1" : "0";
  }
  const choke = view.fields.feed.value === "choke" ? "1" : "0";
  for (const feed of $$(SEL.feeds)) feed.dataset.choke = choke;
}

function renderSweepOptions(view) {
  const select = $(SEL.sweepParam);
  const current = Array.from(select.options).map((o) => o.value).join();
  if (current !== view.sweep_options.join()) select.replaceChildren(...view.sweep_options.map((p) => new Option(p, p)));
  select.value = view.sweep_param;
}

// ---- plots (Plotly.react redraws in place) ---------------------------------
//
// A plot is redrawn only when its data changed since it was last drawn, and
// only once it is on screen (or near it): a plot scrolled out of view, or in
// a panel not shown yet, keeps its newest data and is drawn when it appears.

const lazy = { seen: new Set(), drawn: new Map(), pending: new Map() };
const observer = new IntersectionObserver(
  (entries) => {
    for (const entry of entries) {
      const id = entry.target.id;
      if (entry.isIntersecting) {
        lazy.seen.add(id);
        flushPlot(id);
      } else lazy.seen.delete(id);
    }
  },
  { rootMargin: "40px 0px" },
);

function plotWhenSeen(sel, data, draw) {
  const el = $(sel);
  const key = JSON.stringify(data);
  if (lazy.drawn.get(el.id) === key) {
    lazy.pending.delete(el.id);
    delete el.dataset.stale;
    return;
  }
  lazy.pending.set(el.id, { key, draw: () => draw(el) });
  if (!observed.has(el.id)) {
    observed.add(el.id);
    observer.observe(el);
  }
  if (lazy.seen.has(el.id)) flushPlot(el.id);
}
const observed = new Set();

// Plots due for drawing are drawn one per task: the first in the task that made it
// due (an answer is drawn as it is shown, with no wait for the next task), the others
// each in a task of its own, so the page answers input between them; none while a
// slider moves.  plotsDrawn() resolves when none is left.
const queue = { ids: [], running: false, waiting: [], holdUntil: 0 };

function flushPlot(id) {
  if (!lazy.pending.has(id) || queue.ids.includes(id)) return;
  queue.ids.push(id);
  if (!queue.running) {
    queue.running = true;
    drawNext();
  }
}

function drawNext() {
  const wait = queue.holdUntil - performance.now();
  if (wait > 0) {
    setTimeout(drawNext, wait); // a slider is moving: draw once it rests
    return;
  }
  const id = queue.ids.shift();
  const job = id && lazy.pending.get(id);
  if (job) {
    lazy.pending.delete(id);
    job.draw();
    lazy.drawn.set(id, job.key);
    delete document.getElementById(id).dataset.stale;
  }
  if (queue.ids.length) {
    setTimeout(drawNext, 0);
    return;
  }
  queue.running = false;
  for (const resolve of queue.waiting.splice(0)) resolve();
}

// The sheet's plots on screen (or near it), by name: the first answer to an edit
// carries only their figures (less to build, send and read); the others, off screen,
// are marked stale until the steady state's answer, which carries every figure.
function plotsOnScreen() {
  return config.figures.filter((name) => lazy.seen.has($(SEL.plots[name]).id));
}

// Until its figure comes, a plot keeps what it shows, dimmed, and nothing older is drawn.
function markStale(sel) {
  const el = $(sel);
  lazy.pending.delete(el.id);
  el.dataset.stale = "";
}

function plotsDrawn() {
  return queue.running ? new Promise((resolve) => queue.waiting.push(resolve)) : Promise.resolve();
}

// The figures are built on the server (ringwise.figures): each is a Plotly figure
// {data, layout}, drawn as it comes.  Every plot offers image download, PNG from
// Plotly's own button and SVG from the one added here.
const SVG_BUTTON = {
  name: "svg",
  title: "Download plot as SVG",
  icon: { width: 1000, height: 1000, path: "M500 50 L500 650 M280 440 L500 660 L720 440 M150 800 L850 800 L850 950 L150 950 Z", transform: "matrix(1 0 0 1 0 0)" },
  click: (gd) => Plotly.downloadImage(gd, { format: "svg", filename: gd.id }),
};

function plotConfig() {
  return { ...config.plot, modeBarButtonsToAdd: [SVG_BUTTON] };
}

const NO_NOISE_METHOD = "Computed phase noise: needs the periodic steady state (none for this design).";

function plotFigure(name, figure) {
  if (!figure) return;
  plotWhenSeen(SEL.plots[name], figure, (el) => Plotly.react(el, figure.data, figure.layout, plotConfig()));
}

// ---- the time-domain run -----------------------------------------------------

function runState(name, text = "") {
  $(SEL.run.panel).dataset.run = name;
  $(SEL.run.status).textContent = text;
  $(SEL.run.start).disabled = name === "running";
  $(SEL.run.stop).disabled = name !== "running";
}

function runError(message) {
  const box = $(SEL.run.error);
  box.textContent = message || "";
  box.hidden = !message;
}

async function startRun() {
  if (!state.view?.ok) {
    runError("Fix the marked fields first: the run needs a design that can be computed.");
    return;
  }
  await stopRun(false);
  runError("");
  const seq = ++run.seq;
  const query = state.view.query;
  const body = { design: state.view.design, cycles: $(SEL.run.cycles).value.trim(), points: config.run.points };
  $(SEL.run.progress).value = 0;
  runState("running", "Starting…");
  let job;
  try {
    job = await post(API.jobs, body);
  } catch (err) {
    if (seq !== run.seq) return;
    runState("failed", "Not started");
    const problem = err.body?.problems?.[0];
    runError(problem?.field === "cycles" ? `Cycles ${problem.message}` : err.message);
    document.dispatchEvent(new CustomEvent(EVENTS.ran, { detail: { state: "failed" } }));
    return;
  }
  if (seq !== run.seq) return;
  run.id = job.id;
  run.query = query;
  runState("running", "Running…");
  poll(seq);
}

async function poll(seq) {
  let job;
  try {
    const response = await fetch(`${API.jobs}/${encodeURIComponent(run.id)}?view=true`);
    job = await response.json();
    if (!response.ok) throw new Error(job.message);
  } catch (err) {
    if (seq !== run.seq) return;
    run.id = null;
    runState("failed", "Lost the run");
    runError(err.message);
    return;
  }
  if (seq !== run.seq) return;
  $(SEL.run.progress).value = job.progress;
  if (job.state === "running" || job.state === "queued") {
    run.timer = setTimeout(() => poll(seq), config.run.poll_ms);
    return;
  }
  const done = run.id;
  run.id = null;
  for (const a of $$("a[data-run-csv]")) {
    a.hidden = job.state !== "done";
    a.href = `${API.jobs}/${encodeURIComponent(done)}/csv/${a.dataset.runCsv}`;
  }
  if (job.state === "done") {
    run.done = job.id; // the summary's link names it while it matches the sheet
    updateLinks();
    renderRun(job.view);
    runState("done", "Finished");
  } else if (job.state === "failed") {
    runState("failed", "The run failed");
    runError(job.error.message);
  } else runState("cancelled", "Stopped");
  document.dispatchEvent(new CustomEvent(EVENTS.ran, { detail: { state: job.state } }));
}

async function stopRun(announce = true) {
  clearTimeout(run.timer);
  const id = run.id;
  run.id = null;
  run.seq++;
  if (!id) return;
  $(SEL.run.stop).disabled = true;
  try {
    const response = await fetch(`${API.jobs}/${encodeURIComponent(id)}`, { method: "DELETE" });
    const job = await response.json();
    $(SEL.run.progress).value = job.progress ?? 0;
  } catch {
    // the server forgets the job on its own; nothing to keep
  }
  if (announce) {
    runState("cancelled", "Stopped");
    document.dispatchEvent(new CustomEvent(EVENTS.ran, { detail: { state: "cancelled" } }));
  }
}

function listItems(list, items, text) {
  list.replaceChildren(...(items.length ? items.map((item) => Object.assign(document.createElement("li"), { textContent: text(item) })) : [noneItem()]));
}

function renderRun(v) {
  $(SEL.run.body).hidden = false;
  for (const el of $$(SEL.run.figures)) {
    const figure = v.shown[el.dataset.field];
    el.dataset.value = figure ? figure.raw : "";
    el.textContent = figure ? figure.text : "—";
  }
  listItems($(SEL.run.notes), v.notes, (n) => n);
  const warnings = $(SEL.run.warnings);
  warnings.replaceChildren(...(v.warnings.length ? v.warnings.map(warningItem) : [noneItem()]));
  $(SEL.run.node).textContent = v.output_node;
  markRunStale(state.view);
  for (const [name, figure] of Object.entries(v.figures)) plotFigure(name, figure);
}

function markRunStale(view) {
  if (run.query !== null) $(SEL.run.stale).hidden = view.query === run.query;
}

// ---- the on-demand panels: spread, standard values, from targets, bench ------
//
// Each panel posts the form texts (and its own inputs, as typed) and renders the
// server's answer: figures by data-field from answer.shown, rows, plots.  A newer
// request supersedes an older one (its answer is dropped, its request aborted).

const tools = {};
for (const name of ["spread", "snap", "synth", "bench"]) tools[name] = { seq: 0, abort: null, query: null, answer: null, undo: null };

const panel = (name) => $(`[data-role='${name}']`);
const val = (id) => $(id).value;

function toolState(name, stateName, text = "") {
  const p = panel(name);
  p.dataset.tool = stateName;
  $(`#${name}-status`).textContent = text;
  const busy = $(`#${name}-busy`);
  if (busy) busy.hidden = stateName !== "busy";
}

function toolError(name, err) {
  const box = $(`#${name}-error`);
  if (!err) {
    box.hidden = true;
    box.textContent = "";
    return;
  }
  const problems = err.body?.problems?.length ? err.body.problems : [{ field: "", message: err.message }];
  box.textContent = problems.map((p) => (p.field ? `${p.field}: ${p.message}` : p.message)).join("; ");
  box.hidden = false;
}

function fill(root, shown) {
  for (const el of $$("[data-field]", root)) {
    const figure = shown[el.dataset.field];
    if (!figure) continue;
    el.dataset.value = figure.raw;
    el.textContent = figure.text;
    if ("hidden" in figure) el.hidden = figure.hidden;
  }
}

function shownCell(tag, shown, path) {
  const el = document.createElement(tag);
  const figure = shown[path];
  el.dataset.field = path;
  el.dataset.value = figure ? figure.raw : "";
  el.textContent = figure ? figure.text : "—";
  return el;
}

function rows(tbody, bases, columns, shown) {
  tbody.replaceChildren(
    ...bases.map((base) => {
      const tr = document.createElement("tr");
      tr.append(...columns.map((col, i) => shownCell(i === 0 ? "th" : "td", shown, `${base}.${col}`)));
      return tr;
    }),
  );
}

async function ask(name, url, body) {
  const t = tools[name];
  const seq = ++t.seq;
  t.abort?.abort();
  t.abort = new AbortController();
  toolError(name, null);
  toolState(name, "busy", "Working…");
  try {
    const answer = await post(url, body, t.abort.signal);
    if (seq !== t.seq) return null;
    toolState(name, "done", "");
    return answer;
  } catch (err) {
    if (err.name === "AbortError" || seq !== t.seq) return null;
    toolState(name, "failed", "Not computed");
    toolError(name, err);
    document.dispatchEvent(new CustomEvent(EVENTS.tool, { detail: { tool: name, state: "failed" } }));
    return null;
  }
}

// The long panels (spread, from targets, bench readings) run as jobs with real
// progress and a Stop button (static/jobs.js); a stopped job's answer is what it
// computed so far, rendered like a finished one.
const jobs = jobRunners();

async function askJob(name, url, body) {
  const t = tools[name];
  const seq = ++t.seq;
  t.abort?.abort();
  toolError(name, null);
  toolState(name, "busy", "Working…");
  try {
    const job = await jobs[name].run(url, body);
    if (!job || seq !== t.seq) return null;
    if (job.state === "failed") throw Object.assign(new Error(job.error.message), { body: job.error });
    if (!job.result) {
      toolState(name, "cancelled", "Stopped");
      document.dispatchEvent(new CustomEvent(EVENTS.tool, { detail: { tool: name, state: "cancelled" } }));
      return null;
    }
    toolState(name, job.state === "done" ? "done" : "stopped", "");
    return job.result;
  } catch (err) {
    if (seq !== t.seq) return null;
    toolState(name, "failed", "Not computed");
    toolError(name, err);
    document.dispatchEvent(new CustomEvent(EVENTS.tool, { detail: { tool: name, state: "failed" } }));
    return null;
  }
}

function toolDone(name, query) {
  tools[name].query = query;
  const stale = $(".tool-stale", panel(name));
  if (stale) stale.hidden = true;
  $(".tool-body", panel(name)).hidden = false;
  document.dispatchEvent(new CustomEvent(EVENTS.tool, { detail: { tool: name, state: "done" } }));
}

function markToolsStale(view) {
  for (const name of ["spread", "snap", "bench"]) {
    const t = tools[name];
    if (t.query === null) continue;
    const stale = t.query !== view.query;
    $(".tool-stale", panel(name)).hidden = !stale;
    if (name === "snap") $("#snap-apply").disabled = stale || !t.answer?.changed.length;
    if (name === "bench") $("#bench-load").disabled = stale || !t.answer;
  }
}

async function runSpread() {
  const texts = formTexts();
  const body = { fields: texts, samples: val("#spread-samples"), seed: val("#spread-seed"), margin: val("#spread-margin"), window_low: val("#spread-low"), window_high: val("#spread-high") };
  const a = await askJob("spread", API.spread, body);
  if (!a) return;
  const p = panel("spread");
  $("[data-role='spread-temps']", p).replaceChildren(
    ...a.temperatures.map((t) => {
      const div = document.createElement("div");
      div.className = "fig";
      const dt = document.createElement("dt");
      dt.textContent = `at ${t} °C`;
      div.append(dt, shownCell("dd", a.shown, `spread.yield_by_temperature.${t}`));
      return div;
    }),
  );
  fill(p, a.shown);
  rows($("[data-role='spread-sens']", p), a.sensitivity_rows, ["part", "value", "tolerance", "S_f", "S_gain", "f_spread", "gain_spread"], a.shown);
  rows($("[data-role='spread-worst']", p), a.worst_rows, ["sample", "T_C", "V_tune", "gain", "f_osc"], a.shown);
  tools.spread.answer = a;
  toolDone("spread", a.query);
  const samplesCsv = $("a[data-spread-csv]");
  samplesCsv.href = `/api/csv/spread?${a.query}&samples=${a.shown["spread.samples"].value}&seed=${a.shown["spread.seed"].value}`;
  samplesCsv.hidden = false;
  const stopped = a.result.spread.stopped;
  toolState("spread", stopped ? "stopped" : "done", stopped ? `Stopped: ${a.shown["spread.samples"].text} of ${a.shown["spread.requested"].text} samples` : `Done: ${a.shown["spread.samples"].text} samples`);
  for (const [name, figure] of Object.entries(a.figures)) plotFigure(name, figure);
}

// Loading texts from a panel: the texts as they were are kept for that panel's undo.
function loadTexts(fields) {
  const before = formTexts();
  for (const [name, text] of Object.entries(fields)) setField(name, text);
  commit();
  return before;
}

async function previewSnap() {
  const a = await ask("snap", API.snap, { fields: formTexts(), series: val("#snap-series"), keep_frequency: $("#snap-keep-f").checked });
  if (!a) return;
  const p = panel("snap");
  fill(p, a.shown);
  rows($("[data-role='snap-rows']", p), a.rows, ["part", "before", "after"], a.shown);
  tools.snap.answer = a;
  toolDone("snap", a.query);
  $("#snap-apply").disabled = a.changed.length === 0;
  toolState("snap", "done", a.changed.length ? `${a.changed.length} inputs would change` : "Every part is already a standard value");
}

function applySnap() {
  const a = tools.snap.answer;
  if (!a) return;
  tools.snap.undo = loadTexts(a.fields);
  tools.snap.query = null; // the preview is now the sheet itself
  $("#snap-apply").disabled = true;
  $("#snap-undo").disabled = false;
  toolState("snap", "applied", `Applied: ${a.changed.join(", ")}`);
}

function undo(name) {
  const before = tools[name].undo;
  if (!before) return;
  tools[name].undo = null;
  loadTexts(before);
  $(`#${name}-undo`).disabled = true;
  toolState(name, "undone", "Restored the texts as they were");
}

async function runSynth() {
  const body = { fields: formTexts(), topology: val("#synth-topology") };
  for (const key of ["f", "Vcc", "IC", "gain", "L", "ratio"]) body[key] = val(`#synth-${key}`);
  for (const key of ["clapp", "choose_Q_L", "choose_load", "choose_device"]) body[key] = $(`#synth-${key}`).checked;
  const a = await askJob("synth", API.synth, body);
  if (!a) return;
  const p = panel("synth");
  fill(p, a.shown);
  listItems($("[data-field='reasons']", p), a.result.reasons, (r) => r);
  tools.synth.undo = loadTexts(a.fields);
  $("#synth-undo").disabled = false;
  toolDone("synth", null);
  toolState("synth", "done", "The sheet now holds the synthesised design");
}

async function runBench() {
  const body = { fields: formTexts(), f_measured: val("#bench-f"), threshold_param: val("#bench-param"), threshold_value: val("#bench-value"), amplitude: val("#bench-amp"), IC: val("#bench-ic") };
  const a = await askJob("bench", API.bench, body);
  if (!a) return;
  const p = panel("bench");
  fill(p, a.shown);
  rows($("[data-role='bench-fitted']", p), a.rows, ["name", "nominal", "fitted", "change", "determined"], a.shown);
  const readings = $("[data-role='bench-readings']", p);
  readings.replaceChildren(
    ...a.readings.map((r) => {
      const tr = document.createElement("tr");
      const th = document.createElement("th");
      th.scope = "row";
      th.textContent = r.label;
      tr.append(th, ...["bench", "nominal_model", "as_built_model"].map((c) => shownCell("td", a.shown, `${r.path}.${c}`)));
      return tr;
    }),
  );
  tools.bench.answer = a;
  toolDone("bench", a.query);
  $("#bench-load").disabled = false;
}

function loadAsBuilt() {
  const a = tools.bench.answer;
  if (!a) return;
  loadTexts(a.fields);
  tools.bench.query = null;
  $("#bench-load").disabled = true;
  toolState("bench", "loaded", "The sheet now holds the as-built design");
}

function wireTools() {
  $("#spread-start").addEventListener("click", runSpread);
  for (const id of ["#spread-samples", "#spread-seed", "#spread-margin", "#spread-low", "#spread-high"]) $(id).addEventListener("keydown", (e) => e.key === "Enter" && runSpread());
  $("#snap-preview").addEventListener("click", previewSnap);
  $("#snap-apply").addEventListener("click", applySnap);
  $("#snap-undo").addEventListener("click", () => undo("snap"));
  $("#synth-run").addEventListener("click", runSynth);
  $("#synth-undo").addEventListener("click", () => undo("synth"));
  $("#bench-run").addEventListener("click", runBench);
  $("#bench-load").addEventListener("click", loadAsBuilt);
}

// ---- import, export, copy --------------------------------------------------

async function importText(text) {
  let doc;
  try {
    doc = JSON.parse(text);
  } catch (err) {
    renderProblems([{ field: "file", message: `is not JSON (${err.message})` }], SEL.importProblems);
    return;
  }
  try {
    const answer = await post(API.importFile, doc);
    renderProblems([], SEL.importProblems);
    for (const [name, value] of Object.entries(answer.fields)) setField(name, value);
    updateLinks(formTexts());
    state.inputAt = performance.now();
    recompute();
    status("Design imported");
  } catch (err) {
    renderProblems(err.body ? err.body.problems : [{ field: "file", message: err.message }], SEL.importProblems);
  }
}

async function copyLink() {
  const share = $(SEL.share);
  try {
    await navigator.clipboard.writeText(share.value);
    status("Link copied");
  } catch {
    share.select();
    status("Press Ctrl+C to copy the selected link");
  }
}

// ---- wiring ----------------------------------------------------------------

function onInput(event) {
  const el = event.target;
  if (el.dataset.ladder) {
    setField(el.dataset.ladder, config.ladders[el.dataset.ladder][Number(el.value)]);
    state.slid = true;
    queue.holdUntil = performance.now() + SLIDER_REST_MS;
    schedule(SLIDER_MS, true);
    return;
  }
  if (el.tagName === "SELECT") return; // its change event commits
  schedule(TYPING_PAUSE_MS);
}

function onChange(event) {
  const el = event.target;
  if (el.dataset.ladder) return; // the drag's input events have scheduled it
  if (el.name === "preset" && config.presets[el.value]) {
    for (const name of PRESET_FIELDS) setField(name, config.presets[el.value][name]);
  }
  commit();
}

function start() {
  document.documentElement.classList.add("js");
  form.addEventListener("input", onInput);
  form.addEventListener("change", onChange);
  form.addEventListener("submit", (e) => {
    e.preventDefault();
    commit();
  });
  $(SEL.sweepParam).addEventListener("change", () => {
    state.whatIfChosen = true;
    csvLinks(query(formTexts()));
    if (state.view?.ok) requestSweep(formTexts(), { ...state.view, sweep_param: $(SEL.sweepParam).value }, performance.now());
  });
  for (const el of $$(SEL.pageState)) el.addEventListener(el.tagName === "SELECT" ? "change" : "input", () => updateLinks());
  $(SEL.copy).addEventListener("click", copyLink);
  $(SEL.run.start).addEventListener("click", startRun);
  $(SEL.run.stop).addEventListener("click", () => stopRun());
  $(SEL.run.cycles).addEventListener("keydown", (e) => e.key === "Enter" && startRun());
  wireTools();
  window.addEventListener("pagehide", () => {
    if (run.id) fetch(`${API.jobs}/${encodeURIComponent(run.id)}`, { method: "DELETE", keepalive: true });
  });
  $(SEL.importFile).addEventListener("change", async (e) => {
    const file = e.target.files[0];
    if (file) await importText(await file.text());
    e.target.value = "";
  });
  document.addEventListener("dragover", (e) => {
    e.preventDefault();
    document.body.classList.add("dropping");
  });
  document.addEventListener("dragleave", (e) => e.relatedTarget === null && document.body.classList.remove("dropping"));
  document.addEventListener("drop", async (e) => {
    e.preventDefault();
    document.body.classList.remove("dropping");
    const file = e.dataTransfer.files[0];
    if (file) await importText(await file.text());
  });
  applyPageState();
  updateLinks();
  const initial = JSON.parse($(SEL.initial).textContent);
  render(initial);
  document.documentElement.dataset.ready = "1";
  plotsDrawn().then(() => document.dispatchEvent(new CustomEvent(EVENTS.rendered, { detail: { seq: 0, inputAt: 0, at: performance.now(), query: initial.query } })));
}

start();

// ringwise design sheet: sends the form to the API and renders what comes back.
// It computes nothing of its own: every number, text and curve is the server's.
// One map of selectors, one of events; no framework, no build step.

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
    wave: "#plot-wave",
    envelope: "#plot-envelope",
    spectrum: "#plot-spectrum",
    fHist: "#plot-f-hist",
    gainHist: "#plot-gain-hist",
    sens: "#plot-sens",
    temp: "#plot-temp",
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
const DEBOUNCE_MS = 60;
const PRESET_FIELDS = ["beta", "IS", "VA", "fT", "C_mu"];

const $ = (sel, root = document) => root.querySelector(sel);
const $$ = (sel, root = document) => Array.from(root.querySelectorAll(sel));
const form = $(SEL.form);
const config = JSON.parse($(SEL.config).textContent);

const state = { mainSeq: 0, sweepSeq: 0, main: null, sweep: null, steady: null, timer: 0, inputAt: 0, view: null };
// The time-domain run: the job being polled, and the query of the design it ran on.
const run = { id: null, timer: 0, query: null, seq: 0 };

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

function updateLinks(texts) {
  const q = query(texts);
  history.replaceState(null, "", q ? `/?${q}` : "/");
  $(SEL.share).value = `${location.origin}/?${q}`;
  $(SEL.exportLink).href = `/api/export?${q}`;
  $(SEL.summaryLink).href = `/summary?${q}`;
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

function schedule() {
  state.inputAt = performance.now();
  const texts = formTexts();
  updateLinks(texts);
  clearTimeout(state.timer);
  state.timer = setTimeout(recompute, DEBOUNCE_MS);
}

async function recompute() {
  const seq = ++state.mainSeq;
  const inputAt = state.inputAt;
  state.main?.abort();
  state.steady?.abort();
  state.main = new AbortController();
  const texts = formTexts();
  $(SEL.outcome).dataset.state = "busy";
  try {
    const view = await post(API.sheet, { fields: texts, sweep_param: $(SEL.sweepParam).value || null }, state.main.signal);
    if (seq !== state.mainSeq) return; // a newer answer is on its way
    render(view);
    document.dispatchEvent(new CustomEvent(EVENTS.rendered, { detail: { seq, inputAt, at: performance.now() } }));
    if (view.ok) requestSweep(texts, view, inputAt);
    if (view.ok && view.result.steady_state === null) requestSteady(texts, seq, inputAt);
  } catch (err) {
    if (err.name !== "AbortError" && seq === state.mainSeq) status(`Not computed: ${err.message}`);
  }
}

// The small-signal answer is shown first; the steady state follows on a second
// request.  An edit in between aborts it (its answer would be for an older design).
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

async function requestSweep(texts, view, inputAt) {
  const seq = ++state.sweepSeq;
  state.sweep?.abort();
  state.sweep = new AbortController();
  const startup = view.result.startup;
  const param = view.sweep_param;
  const hint = param === startup.threshold_param ? startup.threshold_value : null;
  try {
    const data = await post(API.sweep, { fields: texts, param, threshold_hint: hint }, state.sweep.signal);
    if (seq !== state.sweepSeq || !data.ok) return;
    plotSweep(data.sweep);
    document.dispatchEvent(new CustomEvent(EVENTS.swept, { detail: { seq, inputAt, at: performance.now() } }));
  } catch (err) {
    if (err.name !== "AbortError") status(`What-if plot not computed: ${err.message}`);
  }
}

function status(text) {
  $(SEL.status).textContent = text;
}

// ---- rendering -------------------------------------------------------------

function render(view) {
  state.view = view;
  for (const [name, f] of Object.entries(view.fields)) {
    const shown = $(`[data-shown="${name}"]`);
    if (shown) shown.textContent = f.display;
    const error = $(`[data-error="${name}"]`);
    error.textContent = f.error || "";
    error.hidden = !f.error;
    const input = form.elements.namedItem(name);
    if (f.error) input.setAttribute("aria-invalid", "true");
    else input.removeAttribute("aria-invalid");
    const ladder = $(`[data-ladder="${name}"]`);
    if (ladder && f.step !== null && ladder !== document.activeElement) ladder.value = f.step;
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
    el.dataset.value = figure.raw;
    if (!el.classList.contains("verdict")) el.textContent = figure.text;
    if ("hidden" in figure) el.hidden = figure.hidden;
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
  plotLoop(view.curves.loop, view);
  plotReactance(view.curves.reactance);
  plotBudget(view.curves.budget);
  plotNoise(view.curves.noise);
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

function flushPlot(id) {
  const job = lazy.pending.get(id);
  if (!job) return;
  lazy.pending.delete(id);
  job.draw();
  lazy.drawn.set(id, job.key);
}

const INK = "#1f2a30";
const ACCENT = "#a2521f";
const PLOT_CONFIG = { displayModeBar: false, responsive: true };

function layout(extra) {
  return {
    margin: { l: 52, r: 52, t: 8, b: 40 },
    paper_bgcolor: "#fffdf8",
    plot_bgcolor: "#fffdf8",
    font: { family: "system-ui, sans-serif", size: 11, color: INK },
    showlegend: true,
    legend: { orientation: "h", x: 0, y: 1.02, yanchor: "bottom", font: { size: 10 } },
    ...extra,
  };
}

const vline = (x, dash, color = INK) => ({ type: "line", xref: "x", yref: "paper", x0: x, x1: x, y0: 0, y1: 1, line: { color, width: 1, dash } });
const hline = (y, dash, yref = "y") => ({ type: "line", xref: "paper", yref, x0: 0, x1: 1, y0: y, y1: y, line: { color: "#5d6a70", width: 1, dash } });

function plotLoop(c, view) {
  const label = view.shown["loop.f_osc"].text;
  plotWhenSeen(SEL.plots.loop, [c, label], (el) => drawLoop(el, c, label));
}

function drawLoop(el, c, label) {
  const shapes = [hline(1, "dot")];
  if (c.f_osc) shapes.push(vline(c.f_osc, "dash", ACCENT));
  Plotly.react(
    el,
    [
      { x: c.f, y: c.magnitude, name: "|T|", line: { color: INK, width: 2 }, hovertemplate: "%{x:.4s}Hz  |T| %{y:.3f}<extra></extra>" },
      { x: c.f, y: c.phase_deg, name: "phase (°)", yaxis: "y2", line: { color: ACCENT, width: 1.5, dash: "dot" }, hovertemplate: "%{x:.4s}Hz  %{y:.1f}°<extra></extra>" },
    ],
    layout({
      xaxis: { type: "log", title: { text: "frequency (Hz)" }, exponentformat: "SI" },
      yaxis: { type: "log", title: { text: "|T|" }, exponentformat: "SI" },
      yaxis2: { overlaying: "y", side: "right", title: { text: "phase (°)" }, zeroline: false },
      shapes,
      annotations: c.f_osc ? [{ x: Math.log10(c.f_osc), y: 1, yref: "paper", text: `f_osc ${label}`, showarrow: false, xanchor: "left", yanchor: "top", font: { color: ACCENT, size: 10 } }] : [],
    }),
    PLOT_CONFIG,
  );
}

function plotSweep(s) {
  plotWhenSeen(SEL.plots.sweep, s, (el) => drawSweep(el, s));
}

function drawSweep(el, s) {
  const shapes = [hline(1, "dot"), vline(s.current, "dot")];
  const annotations = [{ x: Math.log10(s.current), y: 0, yref: "paper", text: "now", showarrow: false, xanchor: "left", yanchor: "bottom", font: { size: 10 } }];
  if (s.threshold) {
    shapes.push(vline(s.threshold, "dash", "#a3322a"));
    annotations.push({ x: Math.log10(s.threshold), y: 1, yref: "paper", text: "loop gain 1", showarrow: false, xanchor: "left", yanchor: "top", font: { color: "#a3322a", size: 10 } });
  }
  Plotly.react(
    el,
    [
      { x: s.values, y: s.gain, name: "loop gain", line: { color: INK, width: 2 }, hovertemplate: `${s.param} %{x:.3s}${s.unit}  gain %{y:.3f}<extra></extra>` },
      { x: s.values, y: s.f_osc, name: "f_osc (Hz)", yaxis: "y2", line: { color: ACCENT, width: 1.5, dash: "dot" }, hovertemplate: `${s.param} %{x:.3s}${s.unit}  %{y:.4s}Hz<extra></extra>` },
    ],
    layout({
      xaxis: { type: "log", title: { text: `${s.param} (${s.unit || "ratio"})` }, exponentformat: "SI" },
      yaxis: { type: "log", title: { text: "loop gain" }, exponentformat: "SI" },
      yaxis2: { overlaying: "y", side: "right", title: { text: "f_osc (Hz)" }, exponentformat: "SI" },
      shapes,
      annotations,
    }),
    PLOT_CONFIG,
  );
}

const REACTANCE_COLOURS = { L: ACCENT, C1: "#1d6b57", C2: "#3b6ea5", C3: "#5b3f8c", C_series: INK };

function plotReactance(r) {
  plotWhenSeen(SEL.plots.reactance, r, (el) => drawReactance(el, r));
}

function drawReactance(el, r) {
  Plotly.react(
    el,
    r.lines.map((line) => ({
      x: r.f,
      y: line.X,
      name: line.label,
      line: { color: REACTANCE_COLOURS[line.part], width: line.part === "C_series" ? 2 : 1.5, dash: line.part === "C_series" ? "dash" : "solid" },
      hovertemplate: `${line.label} %{x:.4s}Hz  %{y:.3s}Ω<extra></extra>`,
    })),
    layout({
      xaxis: { type: "log", title: { text: "frequency (Hz)" }, exponentformat: "SI" },
      yaxis: { type: "log", title: { text: "reactance (Ω)" }, exponentformat: "SI" },
      shapes: [vline(r.f_ideal, "dot")],
    }),
    PLOT_CONFIG,
  );
}

function plotBudget(b) {
  const formula = $("[data-role='hand-formula']");
  formula.textContent = b.caption;
  plotWhenSeen(SEL.plots.budget, b, (el) => drawBudget(el, b));
}

function drawBudget(el, b) {
  Plotly.react(
    el,
    [
      {
        type: "bar",
        orientation: "h",
        x: b.cost_dB,
        y: b.labels,
        text: b.text,
        textposition: "auto",
        cliponaxis: false,
        marker: { color: b.cost_dB.map((v) => (v >= 0 ? ACCENT : "#1d6b57")) },
        customdata: b.share,
        hovertemplate: "%{y}: %{text} (%{customdata:.0%} of the gap)<extra></extra>",
      },
    ],
    layout({
      showlegend: false,
      margin: { l: 190, r: 16, t: 8, b: 40 },
      xaxis: { title: { text: "loop gain it costs (dB)" }, zeroline: true, range: b.x_range },
      yaxis: { autorange: "reversed", automargin: true },
    }),
    PLOT_CONFIG,
  );
}

const NO_NOISE_METHOD = "Computed phase noise: needs the periodic steady state (none for this design).";
const REGION_FILL = { cube: "rgba(162, 82, 31, 0.08)", square: "rgba(29, 107, 87, 0.07)", flicker: "rgba(154, 106, 0, 0.08)", floor: "rgba(59, 110, 165, 0.07)" };

function plotNoise(n) {
  plotWhenSeen(SEL.plots.noise, n, (el) => drawNoise(el, n));
}

function drawNoise(el, n) {
  const shapes = n.regions.map((r) => ({
    type: "rect",
    layer: "below",
    xref: "x",
    yref: "paper",
    x0: r.x0,
    x1: r.x1,
    y0: 0,
    y1: 1,
    fillcolor: REGION_FILL[r.kind],
    line: { width: 0 },
    label: { text: r.label, textposition: "top center", font: { size: 10, color: "#5d6a70" } },
  }));
  for (const x of [n.f_corner, n.leeson_corner]) if (x) shapes.push(vline(x, "dot", "#5d6a70"));
  const c = n.computed;
  const hover = "%{x:.3s}Hz  %{y:.1f} dBc/Hz<extra></extra>";
  const traces = c
    ? [
        { x: c.offset, y: c.dBc_Hz, name: "L(Δf) from the circuit's noise sources", line: { color: INK, width: 2 }, hovertemplate: hover },
        { x: c.points.offset, y: c.points.dBc_Hz, name: "reported offsets", mode: "markers", marker: { color: ACCENT, size: 7, symbol: "diamond" }, hovertemplate: hover },
        { x: n.offset, y: n.dBc_Hz, name: `Leeson with F = ${n.F_dB} dB (comparison)`, line: { color: "#5d6a70", width: 1.4, dash: "dash" }, hovertemplate: hover },
      ]
    : [
        { x: n.offset, y: n.dBc_Hz, name: "L(Δf), Leeson", line: { color: INK, width: 2 }, hovertemplate: hover },
        { x: n.points.offset, y: n.points.dBc_Hz, name: "reported offsets", mode: "markers", marker: { color: ACCENT, size: 7, symbol: "diamond" }, hovertemplate: hover },
      ];
  if (c && c.flicker_corner) shapes.push(vline(c.flicker_corner, "dashdot", ACCENT));
  Plotly.react(
    el,
    traces,
    layout({
      margin: { l: 58, r: 16, t: 24, b: 40 },
      xaxis: { type: "log", title: { text: "offset from the carrier (Hz)" }, exponentformat: "SI", range: [1, 7] },
      yaxis: { title: { text: "L (dBc/Hz)" } },
      shapes,
    }),
    PLOT_CONFIG,
  );
}

function plotWave(w, node) {
  plotWhenSeen(SEL.plots.wave, w, (el) =>
    Plotly.react(
      el,
      [
        { x: w.t, y: w.v_out, name: `output (${node})`, line: { color: INK, width: 1.6 }, hovertemplate: "%{x:.4s}s  %{y:.3s}V<extra></extra>" },
        { x: w.t, y: w.v_be, name: "v_be", yaxis: "y2", line: { color: ACCENT, width: 1.3, dash: "dot" }, hovertemplate: "%{x:.4s}s  v_be %{y:.3s}V<extra></extra>" },
      ],
      layout({
        xaxis: { title: { text: "time (s)" }, exponentformat: "SI", ticksuffix: "s" },
        yaxis: { title: { text: "output node (V)" }, exponentformat: "SI" },
        yaxis2: { overlaying: "y", side: "right", title: { text: "v_be (V)" }, zeroline: false },
      }),
      PLOT_CONFIG,
    ),
  );
}

function plotEnvelope(e) {
  plotWhenSeen(SEL.plots.envelope, e, (el) =>
    Plotly.react(
      el,
      [{ x: e.t, y: e.v, name: "half peak-to-peak per period", line: { color: INK, width: 1.8 }, hovertemplate: "%{x:.4s}s  %{y:.3s}V<extra></extra>" }],
      layout({
        showlegend: false,
        margin: { l: 52, r: 16, t: 8, b: 40 },
        xaxis: { title: { text: "time from the kick (s)" }, exponentformat: "SI", ticksuffix: "s" },
        yaxis: { title: { text: "amplitude (V)" }, exponentformat: "SI", rangemode: "tozero" },
      }),
      PLOT_CONFIG,
    ),
  );
}

function plotSpectrum(c) {
  const data = { spectrum: c.spectrum, bars: c.bars };
  plotWhenSeen(SEL.plots.spectrum, data, (el) =>
    Plotly.react(
      el,
      [
        { type: "bar", x: c.bars.f, y: c.bars.height, base: c.bars.base, customdata: c.bars.dBc, name: "harmonics", marker: { color: ACCENT }, width: c.bars.width, hovertemplate: "%{x:.4s}Hz  %{customdata:.1f} dBc<extra></extra>" },
        { x: c.spectrum.f, y: c.spectrum.dBc, name: "spectrum", line: { color: "#5d6a70", width: 1 }, hovertemplate: "%{x:.4s}Hz  %{y:.1f} dBc<extra></extra>" },
      ],
      layout({
        margin: { l: 52, r: 16, t: 8, b: 40 },
        xaxis: { title: { text: "frequency (Hz)" }, exponentformat: "SI" },
        yaxis: { title: { text: "level (dBc)" }, range: [c.bars.base, 5] },
      }),
      PLOT_CONFIG,
    ),
  );
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
  if (job.state === "running") {
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
  plotWave(v.curves.waveform, v.output_node);
  plotEnvelope(v.curves.envelope);
  plotSpectrum(v.curves);
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
  const a = await ask("spread", API.spread, body);
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
  rows($("[data-role='spread-worst']", p), a.worst_rows, ["sample", "T_C", "gain", "f_osc"], a.shown);
  tools.spread.answer = a;
  toolDone("spread", a.query);
  const samplesCsv = $("a[data-spread-csv]");
  samplesCsv.href = `/api/csv/spread?${a.query}&samples=${a.shown["spread.samples"].value}&seed=${a.shown["spread.seed"].value}`;
  samplesCsv.hidden = false;
  toolState("spread", "done", `Done: ${a.shown["spread.samples"].text} samples`);
  plotHist(SEL.plots.fHist, a.curves.f_hist, "f_osc (Hz)", a.curves.f_hist.window || [], "Hz");
  plotHist(SEL.plots.gainHist, a.curves.gain_hist, "loop gain", [1, a.curves.gain_hist.margin], "");
  plotSens(a.curves.sensitivity);
  plotTemp(a.curves.temperature);
}

function plotHist(sel, h, title, lines, unit) {
  plotWhenSeen(sel, [h, lines], (el) =>
    Plotly.react(
      el,
      [{ type: "bar", x: h.x, y: h.count, width: h.width, marker: { color: INK }, hovertemplate: `%{x:.4s}${unit}  %{y} samples<extra></extra>` }],
      layout({
        showlegend: false,
        margin: { l: 52, r: 16, t: 8, b: 40 },
        bargap: 0,
        xaxis: { title: { text: title }, exponentformat: "SI" },
        yaxis: { title: { text: "samples" } },
        shapes: lines.map((x) => vline(x, "dash", ACCENT)),
      }),
      PLOT_CONFIG,
    ),
  );
}

function plotSens(s) {
  plotWhenSeen(SEL.plots.sens, s, (el) =>
    Plotly.react(
      el,
      [
        { type: "bar", orientation: "h", y: s.parts, x: s.f_spread, name: "f_osc spread (%)", marker: { color: ACCENT }, hovertemplate: "%{y}: %{x:.3f} % of f<extra></extra>" },
        { type: "bar", orientation: "h", y: s.parts, x: s.gain_spread, name: "loop-gain spread (%)", marker: { color: INK }, hovertemplate: "%{y}: %{x:.3f} % of gain<extra></extra>" },
      ],
      layout({
        barmode: "group",
        margin: { l: 70, r: 16, t: 24, b: 40 },
        xaxis: { title: { text: "|S|·tolerance (%)" } },
        yaxis: { type: "category", dtick: 1, autorange: "reversed", automargin: true },
      }),
      PLOT_CONFIG,
    ),
  );
}

function plotTemp(t) {
  plotWhenSeen(SEL.plots.temp, t, (el) =>
    Plotly.react(
      el,
      [
        { x: t.T_C, y: t.p95, name: "95 %", line: { color: "#5d6a70", width: 1, dash: "dot" }, hovertemplate: "%{x} °C  %{y:.5s}Hz<extra></extra>" },
        { x: t.T_C, y: t.p5, name: "5 %", fill: "tonexty", fillcolor: "rgba(162, 82, 31, 0.12)", line: { color: "#5d6a70", width: 1, dash: "dot" }, hovertemplate: "%{x} °C  %{y:.5s}Hz<extra></extra>" },
        { x: t.T_C, y: t.p50, name: "median", line: { color: INK, width: 2 }, hovertemplate: "%{x} °C  %{y:.5s}Hz<extra></extra>" },
      ],
      layout({
        margin: { l: 58, r: 16, t: 24, b: 40 },
        xaxis: { title: { text: "temperature (°C)" } },
        yaxis: { title: { text: "f_osc (Hz)" }, exponentformat: "SI" },
      }),
      PLOT_CONFIG,
    ),
  );
}

// Loading texts from a panel: the texts as they were are kept for that panel's undo.
function loadTexts(fields) {
  const before = formTexts();
  for (const [name, text] of Object.entries(fields)) setField(name, text);
  schedule();
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
  const a = await ask("synth", API.synth, body);
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
  const a = await ask("bench", API.bench, body);
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
  if (el.dataset.ladder) setField(el.dataset.ladder, config.ladders[el.dataset.ladder][Number(el.value)]);
  if (el.name === "preset" && config.presets[el.value]) {
    for (const name of PRESET_FIELDS) setField(name, config.presets[el.value][name]);
  }
  schedule();
}

function start() {
  document.documentElement.classList.add("js");
  form.addEventListener("input", onInput);
  form.addEventListener("change", (e) => e.target.tagName === "SELECT" && onInput(e));
  form.addEventListener("submit", (e) => {
    e.preventDefault();
    recompute();
  });
  $(SEL.sweepParam).addEventListener("change", () => csvLinks(query(formTexts())));
  $(SEL.sweepParam).addEventListener("change", () => state.view?.ok && requestSweep(formTexts(), { ...state.view, sweep_param: $(SEL.sweepParam).value }, performance.now()));
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
  // the server writes the link relative (it never builds URLs from the Host header)
  $(SEL.share).value = new URL($(SEL.share).value, location.origin).href;
  const initial = JSON.parse($(SEL.initial).textContent);
  render(initial);
  if (initial.ok) plotSweep(initial.curves.sweep);
  document.documentElement.dataset.ready = "1";
  document.dispatchEvent(new CustomEvent(EVENTS.rendered, { detail: { seq: 0, inputAt: 0, at: performance.now() } }));
}

start();

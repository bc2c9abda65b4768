// ringwise one-page summary: draws the server's figures (ringwise.figures) as
// static plots for print.  The figures are the sheet's own; only the type size
// and the margins (the sheet's, scaled to the smaller type) are the printed page's,
// the tick labels stay level (the page is read on paper, not turned), and the
// legend gives way to the plot's caption, which names every line (the legend
// would take a third of a plot this small).
const PRINT = { font: { size: 8 }, top: 6 };

function draw(el, figure) {
  const scale = PRINT.font.size / (figure.layout.font?.size || PRINT.font.size);
  const margin = Object.fromEntries(Object.entries(figure.layout.margin || {}).map(([k, v]) => [k, Math.round(v * scale)]));
  const level = (axis) => axis && { ...axis, tickangle: 0 };
  const layout = {
    ...figure.layout,
    width: el.clientWidth,
    height: el.clientHeight,
    margin: { ...margin, t: PRINT.top },
    font: { ...figure.layout.font, ...PRINT.font },
    showlegend: false,
    xaxis: level(figure.layout.xaxis),
  };
  return Plotly.newPlot(el, figure.data, layout, { staticPlot: true, responsive: false });
}

// The link printed on the page: this page's own origin and the design's query.
function showLink() {
  const a = document.querySelector(".sum-link a");
  if (a) a.textContent = new URL(a.getAttribute("href"), location.origin).href;
}

async function start() {
  showLink();
  const figures = JSON.parse(document.getElementById("ringwise-figures").textContent);
  const jobs = [];
  for (const el of document.querySelectorAll("[data-figure]")) {
    const figure = figures[el.dataset.figure];
    if (figure) jobs.push(draw(el, figure));
  }
  await Promise.all(jobs);
  document.documentElement.dataset.ready = "1";
}

start();

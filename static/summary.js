// ringwise one-page summary: draws the server's figures (ringwise.figures) as
// static plots for print.  The figures are the sheet's own; only the type size
// and the margins are the printed page's.
const PRINT = { font: { size: 8 }, legend: { font: { size: 7 } } };

function draw(el, figure) {
  const layout = {
    ...figure.layout,
    width: el.clientWidth,
    height: el.clientHeight,
    font: { ...figure.layout.font, ...PRINT.font },
    legend: { ...figure.layout.legend, ...PRINT.legend },
  };
  return Plotly.newPlot(el, figure.data, layout, { staticPlot: true, responsive: false });
}

async function start() {
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

// ringwise long jobs on the sheet: start one, show its real progress, stop it.
//
// A panel's long work (spread, from targets, bench readings) is posted to
// `<url>/jobs`; the server answers 202 with the job, which is polled at
// GET /api/jobs/{id} for its progress (the fraction the core reports) and its
// answer; the Stop button sends DELETE /api/jobs/{id}, and the job ends
// "cancelled" with what it computed so far where that means something (a
// spread's samples done).  The progress is shown as a bar and in words, and
// the Stop button says what it does: never colour alone.  The answer is
// rendered by the caller (sheet.js); this module computes nothing.

export const JOBS_URL = "/api/jobs";
// How often a running job is polled, ms.
export const POLL_MS = 150;

const ENDED = new Set(["done", "cancelled", "failed"]);

function percent(fraction) {
  return `${Math.floor(100 * Math.min(1, Math.max(0, fraction)))} %`;
}

async function request(url, options) {
  const response = await fetch(url, options);
  const data = await response.json();
  if (!response.ok) throw Object.assign(new Error(data.message), { body: data, status: response.status });
  return data;
}

// One panel's progress block: <div data-job="NAME"> holding a <progress>, a
// [data-role='job-text'] and a button[data-role='job-stop'].
export class JobRunner {
  constructor(root) {
    this.root = root;
    this.bar = root.querySelector("progress");
    this.text = root.querySelector("[data-role='job-text']");
    this.stopButton = root.querySelector("button[data-role='job-stop']");
    this.id = null;
    this.seq = 0;
    this.stopButton.addEventListener("click", () => this.stop());
  }

  show(state, fraction, words) {
    this.root.hidden = false;
    this.root.dataset.state = state;
    this.bar.value = fraction;
    this.bar.setAttribute("aria-valuetext", words);
    this.text.textContent = words;
    this.stopButton.disabled = ENDED.has(state) || this.id === null;
  }

  // Start the job and resolve with it once it has ended (done, cancelled with
  // its partial answer, or failed with its error); null when a newer run of
  // this panel replaced it.  A refusal (429, 422) rejects with the API's error.
  async run(url, body) {
    const seq = ++this.seq;
    this.forget();
    this.show("starting", 0, "Starting…");
    let job;
    try {
      job = await request(`${url}/jobs`, {
        method: "POST",
        headers: { "Content-Type": "application/json" },
        body: JSON.stringify(body),
      });
    } catch (err) {
      if (seq === this.seq) this.show("failed", 0, err.status === 429 ? "Not started: the server is busy" : "Not started");
      throw err;
    }
    if (seq !== this.seq) {
      this.cancel(job.id);
      return null;
    }
    this.id = job.id;
    while (!ENDED.has(job.state)) {
      this.show(job.state, job.progress, job.state === "queued" ? "Waiting for a free worker…" : `Running: ${percent(job.progress)} done`);
      await new Promise((resolve) => setTimeout(resolve, POLL_MS));
      if (seq !== this.seq) return null;
      try {
        job = await request(`${JOBS_URL}/${encodeURIComponent(job.id)}`);
      } catch (err) {
        if (seq !== this.seq) return null;
        this.id = null;
        this.show("failed", 0, "Lost the job");
        throw err;
      }
      if (seq !== this.seq) return null;
    }
    this.id = null;
    const words = {
      done: "Done",
      cancelled: job.result ? `Stopped at ${percent(job.progress)}: showing what was computed` : "Stopped before anything was computed",
      failed: "Failed",
    }[job.state];
    this.show(job.state, job.state === "done" ? 1 : job.progress, words);
    return job;
  }

  // The Stop button: the server stops the job at its next progress report and
  // keeps what it has; the polling loop then sees it end.
  async stop() {
    const id = this.id;
    if (id === null) return;
    this.stopButton.disabled = true;
    this.text.textContent = "Stopping…";
    try {
      await request(`${JOBS_URL}/${encodeURIComponent(id)}`, { method: "DELETE" });
    } catch {
      // it ended on its own meanwhile, or was forgotten: the polling loop says which
    }
  }

  // Leave the current job (a newer run replaces it): stop it on the server.
  forget() {
    if (this.id !== null) this.cancel(this.id);
    this.id = null;
  }

  cancel(id) {
    fetch(`${JOBS_URL}/${encodeURIComponent(id)}`, { method: "DELETE", keepalive: true }).catch(() => {});
  }
}

// The runners of the page's progress blocks, by panel name.
export function jobRunners(root = document) {
  const out = {};
  for (const el of root.querySelectorAll("[data-job]")) out[el.dataset.job] = new JobRunner(el);
  return out;
}

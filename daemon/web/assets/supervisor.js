// The line supervisor's page: the lot in progress, yield so far (the store's one definition,
// API call lot.summary), failure Pareto, resonance histogram, calibration, instruments and the
// last 50 runs, refreshed as the station's events arrive.
"use strict";

const lotParam = new URLSearchParams(location.search).get("lot") || "";
let refreshTimer = null;

function scheduleRefresh(delay) {
  if (refreshTimer) return;
  refreshTimer = setTimeout(() => { refreshTimer = null; refresh().then(markLive).catch(() => {}); }, delay);
}

function paretoSvg(pareto) {
  const W = 460, row = 26, left = 120;
  const H = Math.max(1, pareto.length) * row + 10;
  const s = svgEl("svg", { viewBox: `0 0 ${W} ${H}`, role: "img", "aria-label": "failure Pareto" });
  if (pareto.length === 0) {
    s.append(svgEl("text", { x: 8, y: 20, class: "empty" }, "no failed or inconclusive unit"));
    return s;
  }
  const max = Math.max(...pareto.map((p) => p.units));
  pareto.forEach((p, i) => {
    const y = 5 + i * row;
    const w = ((W - left - 50) * p.units) / max;
    s.append(svgEl("text", { x: left - 6, y: y + 16, "text-anchor": "end", class: "lbl" }, p.failure_class),
             svgEl("rect", { x: left, y: y + 3, width: Math.max(1, w), height: row - 8, class: "bar" }),
             svgEl("text", { x: left + w + 6, y: y + 16, class: "lbl", "data-class": p.failure_class }, String(p.units)));
  });
  return s;
}

function histogramSvg(h) {
  const W = 460, H = 190, L = 34, B = 30, T = 8;
  const s = svgEl("svg", { viewBox: `0 0 ${W} ${H}`, role: "img", "aria-label": "histogram of resonance frequencies" });
  if (!h.bins.length) {
    s.append(svgEl("text", { x: 8, y: 20, class: "empty" }, "no unit with a resonance yet"));
    return s;
  }
  const lo = h.bins[0].low_hz, hi = h.bins[h.bins.length - 1].high_hz;
  const max = Math.max(1, ...h.bins.map((b) => b.count));
  const x = (f) => L + ((W - L - 8) * (f - lo)) / (hi - lo);
  const y = (n) => H - B - ((H - B - T) * n) / max;
  for (const b of h.bins) {
    if (b.count > 0) s.append(svgEl("rect", { x: x(b.low_hz), y: y(b.count), width: Math.max(1, x(b.high_hz) - x(b.low_hz) - 1),
                                              height: H - B - y(b.count), class: "hbar" }));
  }
  s.append(svgEl("line", { x1: L, y1: H - B, x2: W - 8, y2: H - B, class: "axis" }),
           svgEl("line", { x1: L, y1: T, x2: L, y2: H - B, class: "axis" }),
           svgEl("text", { x: L - 4, y: T + 10, "text-anchor": "end", class: "lbl" }, String(max)),
           svgEl("text", { x: L - 4, y: H - B, "text-anchor": "end", class: "lbl" }, "0"));
  const ticks = roundTicks(lo, hi, 6);
  for (const f of ticks.values) {
    const tx = x(f);
    const anchor = tx < L + 12 ? "start" : tx > W - 20 ? "end" : "middle";
    s.append(svgEl("line", { x1: tx, y1: H - B, x2: tx, y2: H - B + 4, class: "axis" }),
             svgEl("text", { x: tx, y: H - B + 14, "text-anchor": anchor, class: "lbl tick" }, mhz(f, ticks.decimals)));
  }
  const hasWindow = h.window_low_hz !== null || h.window_high_hz !== null;
  const legend = [hasWindow ? "dashed: window" : null, h.mean_hz !== null ? "solid: mean" : null].filter((t) => t);
  s.append(svgEl("text", { x: (W + L) / 2, y: H - 2, "text-anchor": "middle", class: "lbl caption" },
                 "resonance (MHz)" + (legend.length ? "; " + legend.join(", ") : "")));
  for (const f of [h.window_low_hz, h.window_high_hz]) {
    if (f !== null) s.append(svgEl("line", { x1: x(f), y1: T, x2: x(f), y2: H - B, class: "win" }));
  }
  if (h.mean_hz !== null) s.append(svgEl("line", { x1: x(h.mean_hz), y1: T, x2: x(h.mean_hz), y2: H - B, class: "mean" }));
  return s;
}

// Axis ticks at round values between lo and hi (Hz): a step of 1, 2 or 5 x 10^n MHz, the
// smallest that gives at most `most` ticks (common practice, no source). `decimals`: the digits
// after the point that the step needs.
function roundTicks(lo, hi, most) {
  const span = (hi - lo) / 1e6;
  let exp = Math.floor(Math.log10(span / most));
  for (;;) {
    for (const m of [1, 2, 5]) {
      const step = m * Math.pow(10, exp);
      const first = Math.ceil(lo / 1e6 / step - 1e-9);
      const last = Math.floor(hi / 1e6 / step + 1e-9);
      if (last - first + 1 <= most) {
        const values = [];
        for (let k = first; k <= last; ++k) values.push(k * step * 1e6);
        return { values, decimals: Math.max(0, -exp) };
      }
    }
    ++exp;
  }
}

function fact(dl, k, v) { dl.append(el("dt", {}, k), el("dd", {}, v)); }

function renderStatus(st) {
  byId("station-name").textContent = "station " + st.station;
  const c = st.calibration || {};
  const dl = clear(byId("cal-facts"));
  const due = c.due || (c.check && c.check.due);
  fact(dl, "state", el("span", { class: due ? "bad-word" : "ok-word", id: "cal-state" },
                      due ? "✗ DUE" + (c.reason ? ": " + c.reason : "") : c.valid ? "✓ valid" : "✗ not valid"));
  if (c.present) {
    fact(dl, "made", `${clockText(c.created_utc)} (${sinceText(c.created_utc)})`);
    fact(dl, "falls due", `by ${clockText(c.expires_utc)} or after ${c.max_units} units (${c.units_since} so far)`);
    fact(dl, "directivity", c.min_directivity_db !== undefined ? `${Number(c.min_directivity_db).toFixed(1)} dB (lowest)` : "–");
    if (c.check) fact(dl, "check standard", `${c.check.standard}: ${c.check.units_since} of ${c.check.every_units} units`);
  }
  const ul = clear(byId("health"));
  for (const i of st.instruments || []) {
    ul.append(el("li", { "data-role": i.role },
                 el("span", { class: i.healthy ? "ok-word" : "bad-word" }, i.healthy ? "✓ OK " : "✗ DOWN "),
                 `${i.name} (${i.role}) · ${i.errors || 0} errors · ${i.reconnects || 0} reconnects`,
                 i.last_error ? el("div", { class: "verdict-detail" }, i.last_error) : null));
  }
  const b = st.busy;
  byId("now-testing").textContent = !b ? "idle" : b.kind === "test" ? `testing ${b.serial} (RF on)` : `${b.kind} ${b.standard || ""}`;
}

function renderSummary(sum) {
  const y = sum.yield;
  byId("lot-name").textContent = sum.lot ? "lot " + sum.lot : "no lot yet";
  byId("t-units").textContent = String(y.units_tested);
  byId("t-first").textContent = y.units_tested ? percent(y.first_pass_yield) : "–";
  byId("t-final").textContent = y.units_tested ? percent(y.final_yield) : "–";
  for (const v of ["pass", "fail", "inconclusive", "aborted"]) byId("t-" + v).textContent = String(y.runs_by_verdict[v] || 0);
  clear(byId("pareto")).append(paretoSvg(sum.pareto));
  const h = sum.resonance;
  clear(byId("histogram")).append(histogramSvg(h));
  byId("hist-facts").textContent = h.count
    ? `${h.count} units · mean ${mhz(h.mean_hz, 2)} MHz` + (h.stddev_hz !== null ? ` · s ${mhz(h.stddev_hz, 2)} MHz` : "") +
      (h.cpk !== null ? ` · Cpk ${h.cpk.toFixed(2)}` : "")
    : "";
  const tb = clear(byId("units"));
  for (const r of sum.last_runs) {
    tb.append(el("tr", { "data-serial": r.serial, "data-verdict": r.verdict },
                 el("td", { class: "time" }, clockText(r.started_utc)), el("td", { class: "mono" }, r.serial),
                 el("td", {}, verdictTag(r.verdict)), el("td", {}, r.failure_class || ""), el("td", { class: "reason" }, r.reason || "")));
  }
}

async function refresh() {
  const [st, sum] = await Promise.all([Station.call("status"), Station.call("lot.summary", lotParam ? { lot: lotParam } : {})]);
  if (st.ok) renderStatus(st.result);
  if (sum.ok) {
    renderSummary(sum.result);
    document.body.dataset.runs = String(sum.result.yield.runs);
  }
}

function setup() {
  const conn = byId("conn");
  Station.on("ready", () => { conn.textContent = "live"; conn.dataset.state = "live"; scheduleRefresh(0); });
  Station.on("lost", () => { conn.textContent = "connection lost – reconnecting…"; conn.dataset.state = "lost"; });
  Station.on("resync", () => scheduleRefresh(0));
  Station.on("event", (ev) => {
    if (ev.event === "started" || ev.event === "result" || ev.event === "error") scheduleRefresh(150);
    else if (ev.event === "progress" && ev.job === "test") byId("now-testing").textContent = `testing ${ev.serial} (RF on) · ${ev.point}/${ev.of}`;
  });
  Station.start("supervisor page");
  setInterval(() => scheduleRefresh(0), 30000);
}

document.addEventListener("DOMContentLoaded", setup);

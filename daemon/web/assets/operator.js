// The operator page: scan serials (none is ever dropped: they queue while a unit is measured,
// and a queued unit starts only once the operator says it is connected),
// calibrate when asked, watch the unit's progress, read the verdict, its reason, the tray and
// the plot. Everything goes through the station's API (common.js); keyboard alone works.
"use strict";

const state = {
  status: null,       // last status result
  queue: [],          // serials scanned and not yet started, oldest first
  go: null,           // the queue's first serial may start: scanned at an idle station, or F2 pressed
  job: null,          // {job:"test"|"calibration"|"check", serial?, standard?, point, of, waiting?}
  asking: null,       // serial whose retest question is open
  starting: false,    // a test.start or history call is on its way
  calDone: [],        // standards measured in the calibration in progress
  shown: false,       // a verdict has been shown: it stays until the next unit starts
  interrupted: null,  // serial under test when the connection was lost
};

function show(panel) {
  for (const id of ["idle-panel", "run-panel", "cal-panel", "question", "verdict-panel"]) byId(id).hidden = id !== panel;
  renderNext();
}

// A serial scanned while another unit was measured waits for its unit to be connected: the
// station must not measure the previous unit under the next one's serial.
function waitingForGo() {
  return !state.job && !state.asking && state.queue.length > 0 && state.go !== state.queue[0] && !calibrationDue();
}
function renderNext() {
  const bar = byId("next-bar");
  bar.hidden = !waitingForGo();
  if (!bar.hidden) byId("next-serial").textContent = state.queue[0];
}
function focusSerial() { const s = byId("serial"); if (document.activeElement !== s) s.focus(); }

function notice(text) {
  const n = byId("notice");
  n.textContent = text || "";
  n.hidden = !text;
}

function dequeue() {
  state.queue.shift();
  state.go = null;
}

function renderQueue() {
  renderNext();
  const q = clear(byId("queue"));
  state.queue.forEach((serial, i) => q.append(el("li", { "data-serial": serial }, serial, i === 0 && state.asking === serial ? " – asking" : "")));
  byId("queue-count").textContent = String(state.queue.length);
}

function calibrationDue() {
  const c = state.status && state.status.calibration;
  if (!c) return null;
  if (c.due) return { kind: "calibration", reason: c.reason || "no calibration yet" };
  if (c.check && c.check.due) return { kind: "check", reason: `the ${c.check.standard} check standard is due (every ${c.check.every_units} units)` };
  return null;
}

function renderStrip() {
  const s = state.status;
  if (!s) return;
  byId("station-name").textContent = "station " + s.station;
  byId("recipe-name").textContent = s.recipe ? `recipe ${s.recipe.name} ${s.recipe.version || ""}` : "no recipe";
  const c = s.calibration || {};
  const chip = byId("cal-chip");
  const due = calibrationDue();
  if (due) {
    chip.textContent = "calibration DUE";
    chip.dataset.state = "due";
  } else if (c.present) {
    chip.textContent = `calibrated ${sinceText(c.created_utc)} · ${c.units_since}/${c.max_units} units · until ${clockText(c.expires_utc)}`;
    chip.dataset.state = "ok";
  }
}

const STANDARDS_DEFAULT = ["OPEN", "SHORT", "LOAD"];
// The recipe's calibration order from status (the kit's mismatch standards included), with
// the plain words the daemon gives for standards that need them.
function calStandards() {
  const list = state.status && state.status.calibration && state.status.calibration.standards;
  return list && list.length ? list : STANDARDS_DEFAULT.map((name) => ({ name, description: "" }));
}
function connectText(standard, description) {
  const what = description ? `${standard} (${description})` : `the ${standard} standard`;
  return `Connect ${what} to the test port, then press F2.`;
}
function describeStandard(standard) {
  const found = calStandards().find((s) => s.name === standard);
  return found ? found.description : "";
}
function renderCalibration(message) {
  const due = calibrationDue();
  const job = state.job && state.job.job !== "test" ? state.job : null;
  show("cal-panel");
  byId("cal-reason").textContent = job ? (job.job === "check" ? "Check standard" : "Calibrating the test port")
                                       : `Calibration needed: ${due ? due.reason : ""}.`;
  const steps = clear(byId("cal-steps"));
  const list = job && job.job === "check" ? [job.standard] : (due && due.kind === "check" ? [state.status.calibration.check.standard] : calStandards().map((s) => s.name));
  for (const std of list) {
    const done = state.calDone.includes(std);
    const current = job && job.standard === std;
    steps.append(el("li", { class: done ? "done" : current ? "current" : "", "data-standard": std },
                    done ? "✓ " : current ? "▶ " : "· ", std));
  }
  const go = byId("cal-go");
  if (!job) {
    byId("cal-text").textContent = "Press F2 to begin. You will connect each standard to the test port in turn.";
    go.textContent = "";
    go.append(due && due.kind === "check" ? "Measure the check standard " : "Begin calibration ", el("kbd", {}, "F2"));
    go.disabled = false;
  } else if (job.waiting) {
    byId("cal-text").textContent = message || connectText(job.standard, describeStandard(job.standard));
    go.textContent = "";
    go.append(`${job.standard} connected: measure `, el("kbd", {}, "F2"));
    go.disabled = false;
  } else {
    byId("cal-text").textContent = `Measuring ${job.standard || ""}… RF is on.`;
    go.disabled = true;
  }
  const bar = byId("cal-bar");
  bar.style.width = job && job.of ? `${(100 * job.point) / job.of}%` : "0%";
}

// A test of the offset pair on a bench without the switch arm stops between its two sweeps for
// the operator to fit the kit's offset line (the daemon's prompt for DUT-OFFSET); RF is off then.
function renderRun() {
  const j = state.job;
  show("run-panel");
  byId("run-serial").textContent = j.serial || "";
  byId("run-bar").style.width = j.of ? `${(100 * j.point) / j.of}%` : "0%";
  byId("run-count").textContent = j.waiting ? "waiting for the second connection" : j.of ? `point ${j.point} of ${j.of}` : "starting…";
  byId("run-prompt").hidden = !j.waiting;
  byId("run-prompt-text").textContent =
    j.waiting ? j.prompt || "Second reading: fit the offset line between the test port and the unit. Then press F2." : "";
  byId("run-rf").textContent = j.waiting ? "RF is off: fit the offset line now."
                                         : "RF is on: keep hands off the antenna and the test port.";
}

function renderIdle() {
  if (state.asking) return show("question");
  if (calibrationDue()) return renderCalibration();
  show(state.shown ? "verdict-panel" : "idle-panel");
}

function renderVerdict(ev) {
  const run = ev.run;
  const v = run.verdict;
  state.shown = true;
  show("verdict-panel");
  const box = byId("verdict");
  box.dataset.verdict = v;
  box.dataset.runId = run.run_id;
  box.dataset.serial = run.serial;
  box.dataset.receivedMs = String(ev.received_ms);
  box.dataset.endedUtc = run.ended_utc || "";
  box.className = "verdict v-" + v;
  clear(byId("verdict-glyph")).append(verdictGlyph(v, 72));
  byId("verdict-word").textContent = VERDICT_WORDS[v] || v;
  byId("verdict-serial").textContent = run.serial;
  byId("verdict-reason").textContent = run.reason || (v === "pass" ? "Every limit is met, with the measurement's uncertainty." : "");
  const advice = ev.advice || {};
  byId("verdict-action").textContent = advice.action || "";
  byId("verdict-detail").textContent = [advice.detail, run.trim && run.trim.text ? "Trim: " + run.trim.text : ""].filter(Boolean).join(" ");
  // An aborted run was not judged: no figures and no plot to read anything from.
  byId("verdict-metrics").textContent = v === "aborted" ? "" : advice.metrics || "";
  const img = byId("plot");
  img.alt = `Return loss of ${run.serial} against the limit lines`;
  if (v !== "aborted" && run.points_count > 0 && run.stored !== false) {
    img.src = `/plot/${encodeURIComponent(run.run_id)}.svg?session=${encodeURIComponent(Station.sessionId())}`;
    img.closest("figure").hidden = false;
  } else {
    img.removeAttribute("src");
    img.closest("figure").hidden = true;
  }
  const recent = byId("recent");
  recent.prepend(el("li", { "data-serial": run.serial, "data-verdict": v, "data-run-id": run.run_id }, verdictTag(v),
                    el("span", { class: "recent-serial" }, run.serial)));
  while (recent.children.length > 30) recent.removeChild(recent.lastChild);
}

async function refreshStatus() {
  const r = await Station.call("status");
  if (!r.ok) return;
  state.status = r.result;
  const b = r.result.busy;
  if (b && !state.job) {
    state.job = { job: b.kind, serial: b.serial, standard: b.standard, point: b.point || 0, of: b.of || 0, waiting: !!b.waiting };
  } else if (b && state.job.job === b.kind && b.waiting && !state.job.waiting) {
    // A prompt whose event the page missed (its event stream dropped meanwhile): status says so.
    Object.assign(state.job, { standard: b.standard, waiting: true });
  } else if (!b) {
    state.job = null;
  }
  renderStrip();
  if (state.job && state.job.job !== "probe") {
    if (state.job.job === "test") renderRun(); else renderCalibration();
  } else {
    renderIdle();
  }
}

// Starts the next queued serial when the station is free; asks first when it was tested before.
async function pump() {
  if (state.job || state.asking || state.starting || state.queue.length === 0) return;
  if (calibrationDue()) { renderCalibration(); return; }
  const serial = state.queue[0];
  if (state.go !== serial) { renderNext(); return; }
  state.starting = true;
  try {
    const h = await Station.call("runs.history", { serial });
    if (h.ok && h.result.runs.length > 0) {
      const last = h.result.runs[h.result.runs.length - 1];
      state.asking = serial;
      byId("question-text").textContent =
        `${serial} was tested before (${h.result.runs.length} run${h.result.runs.length > 1 ? "s" : ""}, last ${VERDICT_WORDS[last.verdict] || last.verdict}). Test it again? The new run is kept beside the old one.`;
      show("question");
      renderQueue();
      return;
    }
    await startTest(serial, false);
  } catch (e) {
    notice("The station did not answer; the serial stays in the queue.");
  } finally {
    state.starting = false;
  }
}

async function startTest(serial, retest) {
  const args = { serial, retest };
  const lot = byId("lot").value.trim();
  const who = byId("operator").value.trim();
  if (lot) args.lot = lot;
  if (who) args.operator = who;
  const r = await Station.call("test.start", args);
  if (r.ok) {
    if (state.queue[0] === serial) dequeue();
    state.go = null;
    notice("");
    if (!state.job) state.job = { job: "test", serial, point: 0, of: r.result.points };
    renderQueue();
    renderRun();
    return;
  }
  const code = r.error.code;
  if (code === "busy") return;                       // the station is busy elsewhere: keep it queued
  if (code === "calibration_due" || code === "check_due") { await refreshStatus(); return; }
  // Refused for the serial itself: take it off the queue, but say so with the serial in full.
  if (state.queue[0] === serial) dequeue();
  notice(`${serial} not tested: ${r.error.message}`);
  renderQueue();
  setTimeout(pump, 0);
}

async function answerRetest(yes) {
  const serial = state.asking;
  if (!serial) return;
  state.asking = null;
  if (yes) {
    renderIdle();
    state.starting = true;
    try { await startTest(serial, true); } finally { state.starting = false; }
  } else {
    if (state.queue[0] === serial) dequeue();
    notice(`${serial} skipped (not tested again).`);
    renderQueue();
    renderIdle();
    pump();
  }
}

async function calibrationAction() {
  const j = state.job;
  if (j && j.waiting) {
    j.waiting = false;
    if (j.job === "test") renderRun(); else renderCalibration();
    const r = await Station.call("cal.answer", { standard: j.standard });
    if (!r.ok) notice(r.error.message);
    return;
  }
  if (j) return;
  const due = calibrationDue();
  if (!due) return;
  state.calDone = [];
  state.go = null;   // the standards take the unit's place at the port: it must be connected again
  const r = await Station.call(due.kind === "check" ? "cal.check" : "cal.start");
  if (!r.ok) notice(r.error.message);
}

async function cancelJob() {
  const j = state.job;
  if (!j) return;
  if (j.waiting) {
    await Station.call("cal.answer", { standard: j.standard, connected: false });
  } else {
    await Station.call("cancel");
  }
}

function onEvent(ev) {
  // A probe (`echoline status` trying an instrument again) is brief and needs nobody: the page
  // only waits for it before starting the next unit.
  if (ev.event === "started" && ev.job === "probe") {
    state.job = { job: "probe" };
  } else if (ev.event === "started") {
    state.job = { job: ev.job, serial: ev.serial, standard: ev.standard, point: 0, of: ev.of || 0, waiting: false };
    if (ev.job === "test") renderRun(); else { state.calDone = []; renderCalibration(); }
  } else if (ev.event === "progress") {
    if (!state.job) state.job = { job: ev.job, serial: ev.serial, standard: ev.standard };
    Object.assign(state.job, { point: ev.point, of: ev.of, waiting: false });
    if (ev.standard && state.job.standard !== ev.standard) {
      if (state.job.standard && !state.calDone.includes(state.job.standard)) state.calDone.push(state.job.standard);
      state.job.standard = ev.standard;
    }
    if (state.job.job === "test") renderRun(); else renderCalibration();
  } else if (ev.event === "prompt" && ev.job === "test") {
    if (!state.job) state.job = { job: "test", serial: ev.serial };
    Object.assign(state.job, {
      standard: ev.standard, waiting: true,
      prompt: `Second reading: ${ev.description || "the unit behind the offset line"}. Then press F2.`,
    });
    renderRun();
  } else if (ev.event === "prompt") {
    if (!state.job) state.job = { job: ev.job };
    if (state.job.standard && state.job.standard !== ev.standard && !state.calDone.includes(state.job.standard)) {
      state.calDone.push(state.job.standard);
    }
    Object.assign(state.job, { standard: ev.standard, waiting: true, point: 0, of: 0 });
    renderCalibration(connectText(ev.standard, ev.description || describeStandard(ev.standard)));
  } else if (ev.event === "result" || ev.event === "error") {
    const job = ev.job;
    state.job = null;
    if (job === "test" && ev.run) {
      renderVerdict(ev);
    } else if (job === "calibration" && ev.calibration) {
      notice(ev.calibration.valid ? "Calibration done and valid." : "Calibration measured but NOT valid: " + (ev.calibration.errors || []).join("; "));
    } else if (job === "check" && ev.check) {
      notice(ev.check.drifted ? "Check standard drifted: calibrate again. " + ev.check.message : "Check standard within its limit.");
    } else if (ev.error) {
      notice(ev.error.message);
    }
    refreshStatus().then(pump);
  }
}

// The connection dropped while a unit was measured (the daemon restarted, say): once back,
// show what the store holds for it, so the operator is never left without its outcome.
async function recoverInterrupted() {
  const serial = state.interrupted;
  state.interrupted = null;
  if (!serial || state.job) return;
  const h = await Station.call("runs.history", { serial });
  if (!h.ok || h.result.runs.length === 0) return;
  const run = h.result.runs[h.result.runs.length - 1];
  const box = byId("verdict");
  if (box.dataset.runId === run.run_id) return;   // its result did arrive
  const advice = run.verdict === "aborted"
    ? { action: "Not judged: the test did not finish. Test the unit again.", detail: "" }
    : { action: "The station was out of reach when this verdict came; it is shown from the run store.", detail: "" };
  renderVerdict({ run, advice, received_ms: Date.now() });
}

function goNext() {
  state.go = state.queue[0];
  renderNext();
  pump();
}

function onKey(e) {
  if (e.key === "F2") {
    e.preventDefault();
    if (state.asking) answerRetest(true); else if (waitingForGo()) goNext(); else calibrationAction();
  } else if (e.key === "Escape") {
    e.preventDefault();
    if (state.asking) answerRetest(false); else cancelJob();
  }
}

function setup() {
  const serial = byId("serial");
  serial.addEventListener("keydown", (e) => {
    if (e.key !== "Enter") return;
    e.preventDefault();
    const value = serial.value.trim();
    serial.value = "";
    if (!value) return;
    // Scanned at an idle station: the unit is at the port, go. Otherwise it waits for F2.
    if (!state.job && !state.asking && !state.starting && state.queue.length === 0 && byId("conn").dataset.state === "live") {
      state.go = value;
    }
    state.queue.push(value);
    renderQueue();
    pump();
  });
  for (const id of ["lot", "operator"]) {
    const f = byId(id);
    f.value = localStorage.getItem("echoline." + id) || "";
    f.addEventListener("change", () => localStorage.setItem("echoline." + id, f.value.trim()));
    f.addEventListener("keydown", (e) => { if (e.key === "Enter") { e.preventDefault(); focusSerial(); } });
  }
  document.addEventListener("keydown", onKey);
  // A click anywhere that is not a control brings the cursor back to the serial field, so the
  // next scan always lands there.
  document.addEventListener("click", (e) => { if (!e.target.closest("input,button,a")) focusSerial(); });
  byId("retest-yes").addEventListener("click", () => { answerRetest(true); focusSerial(); });
  byId("retest-no").addEventListener("click", () => { answerRetest(false); focusSerial(); });
  byId("cal-go").addEventListener("click", () => { calibrationAction(); focusSerial(); });
  byId("cal-cancel").addEventListener("click", () => { cancelJob(); focusSerial(); });
  byId("run-go").addEventListener("click", () => { calibrationAction(); focusSerial(); });
  byId("cancel").addEventListener("click", () => { cancelJob(); focusSerial(); });
  byId("next-go").addEventListener("click", () => { goNext(); focusSerial(); });
  setInterval(renderStrip, 15000);

  const conn = byId("conn");
  Station.on("ready", () => {
    conn.textContent = "live";
    conn.dataset.state = "live";
    refreshStatus().then(recoverInterrupted).then(() => { markLive(); pump(); }).catch(() => {});
  });
  Station.on("resync", () => refreshStatus().catch(() => {}));
  Station.on("lost", () => {
    conn.textContent = "connection lost – reconnecting…";
    conn.dataset.state = "lost";
    state.starting = false;
    if (state.job && state.job.job === "test" && state.job.serial) state.interrupted = state.job.serial;
  });
  Station.on("event", onEvent);
  Station.start("operator page");
  focusSerial();
}

document.addEventListener("DOMContentLoaded", setup);

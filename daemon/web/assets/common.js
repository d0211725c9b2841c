// Shared by the station pages: the session with the daemon, the page API (POST /api, the
// JSON-lines API's requests and replies), the live event stream, and the verdict glyphs.
"use strict";

const Station = (() => {
  const SESSION_HEADER = "X-Echoline-Session";
  let session = null;
  let nextId = 1;
  let source = null;
  let reconnectTimer = null;
  const listeners = { event: [], ready: [], lost: [], resync: [] };

  function on(kind, fn) { listeners[kind].push(fn); }
  function emit(kind, arg) { for (const fn of listeners[kind]) fn(arg); }

  async function post(path, body) {
    const r = await fetch(path, {
      method: "POST",
      headers: { "Content-Type": "application/json", [SESSION_HEADER]: session || "new" },
      body: JSON.stringify(body),
      cache: "no-store",
      credentials: "same-origin",
    });
    let data = null;
    try { data = await r.json(); } catch (e) { data = null; }
    return { status: r.status, data };
  }

  // Opens (or resumes, after a reload) this page's session. A remote page needs the token.
  async function open(client) {
    const body = { client };
    const kept = sessionStorage.getItem("echoline.session");
    if (kept) body.resume = kept;
    const token = sessionStorage.getItem("echoline.token");
    if (token) body.token = token;
    const r = await post("/session", body);
    if (r.status === 401) {
      const t = window.prompt("This station needs its API token (ask the test engineer):");
      if (t) { sessionStorage.setItem("echoline.token", t); return open(client); }
      throw new Error("no token");
    }
    if (!r.data || !r.data.ok) throw new Error("session refused");
    session = r.data.session;
    sessionStorage.setItem("echoline.session", session);
  }

  // One API call; resolves to the reply object {ok, result | error}.
  async function call(name, args) {
    const r = await post("/api", { v: 1, id: nextId++, call: name, args: args || {} });
    if (r.status === 401) { sessionStorage.removeItem("echoline.session"); throw new Error("session lost"); }
    if (!r.data) throw new Error("no reply");
    return r.data;
  }

  function listen() {
    if (source) source.close();
    source = new EventSource("/events?session=" + encodeURIComponent(session));
    source.addEventListener("ready", () => emit("ready"));
    source.addEventListener("resync", () => emit("resync"));
    source.onmessage = (m) => {
      let ev = null;
      try { ev = JSON.parse(m.data); } catch (e) { return; }
      ev.received_ms = Date.now();
      emit("event", ev);
    };
    source.onerror = () => {
      emit("lost");
      source.close();
      source = null;
      scheduleReconnect();
    };
  }

  function scheduleReconnect() {
    if (reconnectTimer) return;
    reconnectTimer = setTimeout(async () => {
      reconnectTimer = null;
      try { await open(clientName); listen(); } catch (e) { scheduleReconnect(); }
    }, 1000);
  }

  let clientName = "page";
  async function start(client) {
    clientName = client;
    try { await open(client); listen(); } catch (e) { emit("lost"); scheduleReconnect(); }
  }

  function sessionId() { return session; }
  return { on, start, call, sessionId };
})();

// The moment the page first shows the station's state (read by the page-load benchmark).
function markLive() {
  if (performance.getEntriesByName("station-live").length === 0) performance.mark("station-live");
}

// Small DOM helpers: text only, never HTML from data.
function el(tag, attrs, ...children) {
  const e = document.createElement(tag);
  for (const [k, v] of Object.entries(attrs || {})) {
    if (k === "class") e.className = v; else e.setAttribute(k, v);
  }
  for (const c of children) if (c !== null && c !== undefined) e.append(c instanceof Node ? c : String(c));
  return e;
}
function svgEl(tag, attrs, ...children) {
  const e = document.createElementNS("http://www.w3.org/2000/svg", tag);
  for (const [k, v] of Object.entries(attrs || {})) e.setAttribute(k, String(v));
  for (const c of children) if (c !== null && c !== undefined) e.append(c instanceof Node ? c : String(c));
  return e;
}
function byId(id) { return document.getElementById(id); }
function clear(node) { while (node.firstChild) node.removeChild(node.firstChild); return node; }

// The verdict's shape, so it never rests on colour alone: PASS a ring with a tick, FAIL a
// square with a cross, INCONCLUSIVE a triangle with a question mark, ABORTED a bar in a
// broken ring.
const VERDICT_WORDS = { pass: "PASS", fail: "FAIL", inconclusive: "INCONCLUSIVE", aborted: "ABORTED" };
function verdictGlyph(verdict, size) {
  const s = svgEl("svg", { viewBox: "0 0 40 40", width: size, height: size, class: "glyph glyph-" + verdict,
                           "aria-hidden": "true" });
  if (verdict === "pass") {
    s.append(svgEl("circle", { cx: 20, cy: 20, r: 16, class: "g-line" }),
             svgEl("path", { d: "M12 21 L18 27 L29 14", class: "g-line" }));
  } else if (verdict === "fail") {
    s.append(svgEl("rect", { x: 5, y: 5, width: 30, height: 30, class: "g-line" }),
             svgEl("path", { d: "M13 13 L27 27 M27 13 L13 27", class: "g-line" }));
  } else if (verdict === "inconclusive") {
    s.append(svgEl("path", { d: "M20 4 L37 35 L3 35 Z", class: "g-line" }),
             svgEl("text", { x: 20, y: 31, "text-anchor": "middle", class: "g-text" }, "?"));
  } else {
    s.append(svgEl("circle", { cx: 20, cy: 20, r: 16, class: "g-line g-dash" }),
             svgEl("path", { d: "M12 20 L28 20", class: "g-line" }));
  }
  return s;
}
function verdictTag(verdict) {
  return el("span", { class: "vtag v-" + verdict }, verdictGlyph(verdict, 16), " " + (VERDICT_WORDS[verdict] || verdict));
}

function mhz(hz, digits) { return hz === null || hz === undefined ? "–" : (hz / 1e6).toFixed(digits === undefined ? 2 : digits); }
function percent(x) { return (100 * x).toFixed(1) + " %"; }
function sinceText(utc) {
  const t = Date.parse(utc);
  if (isNaN(t)) return "–";
  const s = Math.max(0, (Date.now() - t) / 1000);
  if (s < 90) return Math.round(s) + " s ago";
  if (s < 5400) return Math.round(s / 60) + " min ago";
  return (s / 3600).toFixed(1) + " h ago";
}
function clockText(utc) {
  const d = new Date(utc);
  return isNaN(d) ? "–" : d.toLocaleTimeString([], { hour: "2-digit", minute: "2-digit", hourCycle: "h23" });
}

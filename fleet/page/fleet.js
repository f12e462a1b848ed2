// The fleet page: one card per rig, redrawn from each push of the server.
"use strict";
const token = new URLSearchParams(location.search).get("token");
const q = token ? "?token=" + encodeURIComponent(token) : "";
const $ = (id) => document.getElementById(id);
let updates = 0;

function el(tag, cls, text) {
  const e = document.createElement(tag);
  if (cls) e.className = cls;
  if (text !== undefined) e.textContent = text;
  return e;
}
// What each run outcome is called on the page: its own word (the badge
// never relies on its colour alone) and, as the badge's tooltip, what it
// means. "invalid" is host trouble: the host, not the firmware, spoiled the
// run, so it says nothing about the build.
const outcomes = {
  pass: ["pass", "every criterion met"],
  fail: ["fail", "a criterion not met"],
  tripped: ["tripped", "an alarm with severity trip e-stopped the run"],
  aborted: ["aborted", "stopped by the operator or an error"],
  invalid: ["invalid: host trouble", "the host, not the firmware, spoiled the run (stalled past the watchdog): no verdict on the build; run it again"],
};
function outcomeBadge(t) {
  if (!t) return el("span", "", "—");
  if (!t.outcome) return el("span", "badge " + t.state, t.state);
  const [word, meaning] = outcomes[t.outcome] || [t.outcome, ""];
  const b = el("span", "badge outcome " + t.outcome, word);
  b.title = meaning + (t.reason ? " (" + t.reason + ")" : "");
  return b;
}
const num = (v, d) => (v === null || v === undefined ? "—" : Number(v).toFixed(d));

// walker draws a stick figure of the rig's telemetry, 1 m = canvas height / 2.2.
function walker(c, t) {
  const r = window.devicePixelRatio || 1;
  c.width = Math.round(c.clientWidth * r); c.height = Math.round(c.clientHeight * r);
  const g = c.getContext("2d"); g.setTransform(r, 0, 0, r, 0, 0);
  const W = c.clientWidth, H = c.clientHeight;
  g.clearRect(0, 0, W, H);
  if (!t || !t.hip_m || t.hip_m[0] === null) return;
  const s = H / 2.2, hx = t.hip_m[0];
  const ground = Math.min(t.feet_m[0][1], t.feet_m[1][1]);
  const P = (p) => [W / 2 + (p[0] - hx) * s, H - 12 - (p[1] - ground) * s];
  g.strokeStyle = "#6b6350"; g.lineWidth = 1.5; g.beginPath(); g.moveTo(0, H - 12); g.lineTo(W, H - 12); g.stroke();
  const h = P(t.hip_m);
  ["#2f6f8f", "#c0612b"].forEach((col, i) => {
    const f = P(t.feet_m[i]);
    g.strokeStyle = col; g.lineWidth = 3; g.beginPath(); g.moveTo(h[0], h[1]); g.lineTo(f[0], f[1]); g.stroke();
  });
  const tt = P(t.torso_top_m);
  g.strokeStyle = "#1d2430"; g.lineWidth = 4; g.beginPath(); g.moveTo(h[0], h[1]); g.lineTo(tt[0], tt[1]); g.stroke();
  g.fillStyle = "#1d2430"; g.beginPath(); g.arc(h[0], h[1], 4, 0, 2 * Math.PI); g.fill();
}

function card(rig) {
  const t = rig.telemetry, st = rig.status;
  const c = el("section", "rig"); c.dataset.rig = rig.id;
  const h = el("h2"); h.appendChild(el("span", "", rig.id));
  const conn = st ? st.state : "unknown";
  h.appendChild(el("span", "badge " + conn, conn)); c.appendChild(h);
  const dl = el("dl");
  const row = (k, v, cls) => { dl.appendChild(el("dt", "", k)); const d = el("dd", cls || "", v); dl.appendChild(d); return d; };
  row("scenario", t ? t.scenario : "—");
  row("firmware", t && t.firmware ? t.firmware : "—");
  const rd = row("run", "", "run");
  rd.appendChild(outcomeBadge(t));
  rd.dataset.state = t ? t.state : ""; rd.dataset.outcome = t && t.outcome ? t.outcome : "";
  row("steps", t ? String(t.steps) : "—", "steps");
  row("time", t ? num(t.t_s, 2) + " s" + (t.clock ? " · " + t.clock : "") : "—");
  row("alarms", String(rig.alarms_seen));
  c.appendChild(dl);
  const cv = el("canvas"); c.appendChild(cv);
  const ul = el("ul", "alarms");
  for (const a of rig.alarms.slice().reverse()) ul.appendChild(el("li", "", a.severity + " " + a.kind + " t=" + num(a.t_s, 2) + " s: " + a.message));
  c.appendChild(ul);
  requestAnimationFrame(() => walker(cv, t));
  return c;
}

function render(doc) {
  updates++;
  $("updates").textContent = updates; $("updates").dataset.count = updates;
  $("broker").textContent = doc.broker;
  $("caution").textContent = doc.caution;
  $("count").textContent = doc.rigs.length;
  const box = $("rigs");
  box.replaceChildren();
  if (!doc.rigs.length) box.appendChild(el("p", "empty", "No rig has published on this broker yet."));
  for (const r of doc.rigs) box.appendChild(card(r));
}

const es = new EventSource("events" + q);
es.onmessage = (e) => render(JSON.parse(e.data));

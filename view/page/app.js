// The live view: reads the rig's event stream and draws. Everything is
// drawn from the messages; the page keeps a bounded window of history.
"use strict";

const WINDOW_S = 10;            // strip chart width, simulated seconds
const MAX_POINTS = 4000;        // per series, whatever the frame rate
const MAX_STEP_ROWS = 2000;     // step table rows kept in the page
const MAX_ALARM_ROWS = 500;     // alarm rows kept in the page
const COLORS = { left: "#2f6f8f", right: "#c0612b", cone: "#8c8a80", grf: "#243a73", bad: "#b0243a",
  ink: "#1d2430", ground: "#e9e3d6", groundLine: "#6b6350", extra: ["#5b4b8a", "#2e7d5b", "#8a6d1f"] };

const token = new URLSearchParams(location.search).get("token");
const q = token ? "?token=" + encodeURIComponent(token) : "";
const $ = (id) => document.getElementById(id);

let setup = null;
let last = null;        // latest frame
let frames = 0;
let weight = 300;       // N, set from the plant
const series = {};      // name → [{t, v}]

// ----- terrain -----
function vertices() {
  const tr = setup.plant.terrain;
  const v = [[tr.start_m[0], tr.start_m[1]]];
  for (const s of tr.segments) {
    const p = v[v.length - 1];
    v.push([p[0] + s.length_m * Math.cos(s.slope_rad), p[1] + s.length_m * Math.sin(s.slope_rad)]);
  }
  return v;
}
let verts = [];
function segmentAt(x) {
  const segs = setup.plant.terrain.segments;
  for (let i = 0; i < segs.length; i++) if (x < verts[i + 1][0]) return i;
  return segs.length - 1;
}
function groundY(x) {
  const i = segmentAt(x), s = setup.plant.terrain.segments[i], p = verts[i];
  return p[1] + (x - p[0]) * Math.tan(s.slope_rad);
}

// ----- canvases -----
function fit(c) {
  const r = window.devicePixelRatio || 1;
  const w = Math.max(1, Math.round(c.clientWidth * r)), h = Math.max(1, Math.round(c.clientHeight * r));
  if (c.width !== w || c.height !== h) { c.width = w; c.height = h; }
  const g = c.getContext("2d");
  g.setTransform(r, 0, 0, r, 0, 0);
  return [g, c.clientWidth, c.clientHeight];
}

function drawWalker() {
  const c = $("walker");
  const [g, W, H] = fit(c);
  g.clearRect(0, 0, W, H);
  if (!setup || !last) return;
  const legs = setup.plant.legs;
  const reach = (l) => l.length_m + (l.shank ? l.shank.length_m : 0); // hip to foot, thigh and shank of a kneed leg
  const scale = H / (2.6 * Math.max(reach(legs[0]), reach(legs[1]))); // px per metre, to scale both ways
  const camX = last.hip[0], camY = groundY(camX);
  const P = (x, y) => [W / 2 + (x - camX) * scale, H * 0.8 - (y - camY) * scale];
  // Ground: the polyline across the window, filled below.
  const x0 = camX - W / 2 / scale, x1 = camX + W / 2 / scale;
  const pts = [[x0, groundY(x0)]];
  for (const v of verts) if (v[0] > x0 && v[0] < x1) pts.push(v);
  pts.push([x1, groundY(x1)]);
  g.beginPath();
  pts.forEach((p, i) => { const q = P(p[0], p[1]); i ? g.lineTo(q[0], q[1]) : g.moveTo(q[0], q[1]); });
  g.lineTo(W, H); g.lineTo(0, H); g.closePath();
  g.fillStyle = COLORS.ground; g.fill();
  g.strokeStyle = COLORS.groundLine; g.lineWidth = 2; g.stroke();
  // Metre ticks on the ground, so speed shows as the ground moving by.
  g.fillStyle = COLORS.groundLine; g.font = "10px system-ui";
  for (let x = Math.ceil(x0); x <= x1; x++) { const q = P(x, groundY(x)); g.fillRect(q[0] - 0.5, q[1], 1, 6); g.fillText(x + " m", q[0] + 2, q[1] + 14); }
  // Friction cones behind the legs; the ground forces are drawn over the
  // legs, since a stance leg is nearly along its force.
  const coneLen = 0.45, fscale = 0.6 / weight; // m per N: the body weight is 0.6 m
  const arrows = [];
  for (let i = 0; i < 2; i++) {
    const f = last.feet[i];
    if (f.mode === "free" || f.px === null) continue;
    const seg = setup.plant.terrain.segments[segmentAt(f.px)];
    const sl = seg.slope_rad, n = [-Math.sin(sl), Math.cos(sl)], t = [Math.cos(sl), Math.sin(sl)];
    const phi = Math.atan(seg.mu_static);
    const px = f.px, py = groundY(px);
    const e1 = [n[0] * Math.cos(phi) + t[0] * Math.sin(phi), n[1] * Math.cos(phi) + t[1] * Math.sin(phi)];
    const e2 = [n[0] * Math.cos(phi) - t[0] * Math.sin(phi), n[1] * Math.cos(phi) - t[1] * Math.sin(phi)];
    const a = P(px, py), b = P(px + e1[0] * coneLen, py + e1[1] * coneLen), d = P(px + e2[0] * coneLen, py + e2[1] * coneLen);
    g.beginPath(); g.moveTo(a[0], a[1]); g.lineTo(b[0], b[1]); g.lineTo(d[0], d[1]); g.closePath();
    g.fillStyle = "rgba(140,138,128,0.18)"; g.fill(); g.strokeStyle = COLORS.cone; g.lineWidth = 1; g.stroke();
    const N = f.n || 0, Ft = f.ft || 0;
    const F = [N * n[0] + Ft * t[0], N * n[1] + Ft * t[1]];
    const outside = f.u === null || f.u > 1;
    arrows.push([a, P(px + F[0] * fscale, py + F[1] * fscale), outside ? COLORS.bad : COLORS.grf]);
  }
  // Legs with their foot arcs, torso, hip.
  for (let i = 0; i < 2; i++) {
    const col = i === 0 ? COLORS.left : COLORS.right;
    const h = P(last.hip[0], last.hip[1]), ft = P(last.foot[i][0], last.foot[i][1]);
    g.strokeStyle = col; g.lineWidth = 4; g.lineCap = "round";
    // A kneed leg bends at its knee: thigh from the hip, shank on to the foot.
    const kneed = legs[i].shank && last.knee;
    const kn = kneed ? P(last.knee[i][0], last.knee[i][1]) : h;
    g.beginPath(); g.moveTo(h[0], h[1]); g.lineTo(kn[0], kn[1]); g.lineTo(ft[0], ft[1]); g.stroke();
    if (kneed) { g.fillStyle = col; g.beginPath(); g.arc(kn[0], kn[1], 5, 0, 2 * Math.PI); g.fill(); }
    const r = legs[i].foot_radius_m;
    if (r > 0) {
      const top = kneed ? last.knee[i] : last.hip;
      const ax = last.foot[i][0] - top[0], ay = last.foot[i][1] - top[1];
      const L = Math.hypot(ax, ay) || 1, u = [ax / L, ay / L];
      g.beginPath();
      for (let k = 0; k <= 24; k++) {
        const a = -0.6 + 1.2 * k / 24, cs = Math.cos(a), sn = Math.sin(a);
        const dir = [u[0] * cs - u[1] * sn, u[0] * sn + u[1] * cs];
        const p = P(last.arc[i][0] + r * dir[0], last.arc[i][1] + r * dir[1]);
        k ? g.lineTo(p[0], p[1]) : g.moveTo(p[0], p[1]);
      }
      g.lineWidth = 3; g.stroke();
    }
  }
  if (setup.plant.torso) {
    const h = P(last.hip[0], last.hip[1]), tt = P(last.torso[0], last.torso[1]);
    g.strokeStyle = COLORS.ink; g.lineWidth = 6; g.beginPath(); g.moveTo(h[0], h[1]); g.lineTo(tt[0], tt[1]); g.stroke();
  }
  const h = P(last.hip[0], last.hip[1]);
  g.fillStyle = COLORS.ink; g.beginPath(); g.arc(h[0], h[1], 7, 0, 2 * Math.PI); g.fill();
  for (const [a, b, col] of arrows) arrow(g, a, b, col);
  g.fillStyle = COLORS.ink; g.font = "12px system-ui";
  g.fillText("t = " + last.t.toFixed(3) + " s   stance: " + (last.stance === 0 ? "left" : "right") + "   (drawn to scale)", 8, 16);
}

function arrow(g, a, b, col) {
  const dx = b[0] - a[0], dy = b[1] - a[1], L = Math.hypot(dx, dy);
  g.strokeStyle = "#fff"; g.lineWidth = 7; g.lineCap = "round";
  g.beginPath(); g.moveTo(a[0], a[1]); g.lineTo(b[0], b[1]); g.stroke(); // a halo, to stand out over a leg
  g.strokeStyle = col; g.fillStyle = col; g.lineWidth = 3;
  g.beginPath(); g.moveTo(a[0], a[1]); g.lineTo(b[0], b[1]); g.stroke();
  if (L < 4) return;
  const ux = dx / L, uy = dy / L;
  g.beginPath(); g.moveTo(b[0], b[1]);
  g.lineTo(b[0] - 10 * ux + 5 * uy, b[1] - 10 * uy - 5 * ux);
  g.lineTo(b[0] - 10 * ux - 5 * uy, b[1] - 10 * uy + 5 * ux); g.closePath(); g.fill();
}

// ----- strip charts -----
function push(name, t, v) {
  // A missing value is kept as a gap, so the line breaks there.
  if (v === undefined || (v !== null && !isFinite(v))) v = null;
  const s = series[name] || (series[name] = []);
  if (s.length && t < s[s.length - 1].t) s.length = 0; // a seek backwards
  s.push({ t, v });
  while (s.length > MAX_POINTS || (s.length && s[0].t < t - WINDOW_S)) s.shift();
}

// chart draws the named series over the last WINDOW_S seconds; refs are
// horizontal reference lines that are always in range.
function chart(id, lines, refs) {
  const [g, W, H] = fit($(id));
  g.clearRect(0, 0, W, H);
  if (!last) return;
  const tEnd = last.t, tStart = tEnd - WINDOW_S;
  let lo = Infinity, hi = -Infinity;
  for (const r of refs) { lo = Math.min(lo, r); hi = Math.max(hi, r); }
  for (const l of lines) for (const p of series[l.name] || []) if (p.v !== null) { lo = Math.min(lo, p.v); hi = Math.max(hi, p.v); }
  if (!isFinite(lo)) { lo = 0; hi = 1; }
  if (hi - lo < 1e-9) { hi += 0.5; lo -= 0.5; }
  const pad = (hi - lo) * 0.08; lo -= pad; hi += pad;
  const X = (t) => 42 + (t - tStart) / WINDOW_S * (W - 50), Y = (v) => 6 + (hi - v) / (hi - lo) * (H - 18);
  g.font = "10px system-ui"; g.fillStyle = "#666";
  for (const r of refs) {
    g.strokeStyle = r === 0 ? "#999" : COLORS.bad; g.setLineDash([4, 3]); g.lineWidth = 1;
    g.beginPath(); g.moveTo(42, Y(r)); g.lineTo(W - 8, Y(r)); g.stroke(); g.setLineDash([]);
    g.fillText(String(r), W - 24, Y(r) - 2);
  }
  g.fillText(hi.toPrecision(3), 4, 12); g.fillText(lo.toPrecision(3), 4, H - 12);
  g.fillText(tStart.toFixed(1) + " s", 42, H - 2); g.fillText(tEnd.toFixed(1) + " s", W - 50, H - 2);
  let lx = 50;
  for (const l of lines) {
    const s = series[l.name] || [];
    g.strokeStyle = l.color; g.lineWidth = 1.5; g.setLineDash(l.dash ? [5, 3] : []);
    g.beginPath();
    let pen = false;
    for (const p of s) {
      if (p.v === null) { pen = false; continue; }
      pen ? g.lineTo(X(p.t), Y(p.v)) : g.moveTo(X(p.t), Y(p.v));
      pen = true;
    }
    g.stroke(); g.setLineDash([]);
    if (l.label) { g.fillStyle = l.color; g.fillText(l.label, lx, 12); lx += g.measureText(l.label).width + 12; }
  }
}

function jointColor(j) { return j === 0 ? COLORS.left : j === 1 ? COLORS.right : COLORS.extra[(j - 2) % 3]; }

function drawCharts() {
  const feet = [{ name: "left", color: COLORS.left }, { name: "right", color: COLORS.right }];
  chart("c-util", feet.map((f) => ({ name: "u." + f.name, color: f.color, label: f.name })), [0, 1]);
  chart("c-normal", feet.map((f) => ({ name: "n." + f.name, color: f.color, label: f.name })), [0]);
  const joints = setup ? setup.joints : [];
  chart("c-angle", joints.map((j, i) => ({ name: "a." + i, color: jointColor(i), label: j })), [0]);
  const tq = [];
  joints.forEach((j, i) => { tq.push({ name: "cmd." + i, color: jointColor(i), dash: true, label: j }); tq.push({ name: "app." + i, color: jointColor(i) }); });
  chart("c-torque", tq, [0]);
  chart("c-lat", [{ name: "lat", color: COLORS.grf, label: "round trip" }, { name: "jit", color: COLORS.right, label: "jitter" }], [0]);
}

// ----- messages -----
function onFrame(f) {
  last = f; frames++;
  const t = f.t;
  ["left", "right"].forEach((n, i) => {
    // Utilization of a foot off the ground is not a number: leave a gap.
    push("u." + n, t, f.feet[i].mode === "free" ? null : f.feet[i].u);
    push("n." + n, t, f.feet[i].n);
  });
  f.angle.forEach((v, i) => push("a." + i, t, v));
  f.cmd.forEach((v, i) => push("cmd." + i, t, v));
  f.app.forEach((v, i) => push("app." + i, t, v));
  push("lat", t, f.lat_us); push("jit", t, f.jit_us);
  $("frames").textContent = frames;
  $("frames").dataset.count = frames;
  $("simtime").textContent = t.toFixed(3);
  $("steps").textContent = f.steps;
  $("counters").textContent = "ticks " + f.ticks + " · deadline misses " + f.misses + " · states resent " + f.resent +
    " · rejected frames " + f.bad_frames + " · snapshots skipped " + f.skipped;
  dirty = true;
}

function cell(v, digits) { return v === null ? "—" : v.toFixed(digits); }

function onStep(s) {
  const tb = $("steptable").tBodies[0];
  const tr = document.createElement("tr");
  const cells = [String(s.index), cell(s.duration_s, 3), cell(s.length_m, 3), cell(s.speed_mps, 3),
    cell(s.peak_utilization, 3), cell(s.min_normal_n, 1), cell(s.end_s, 3)];
  cells.forEach((c, i) => { const td = document.createElement("td"); td.textContent = c; if (i === 4 && (s.peak_utilization === null || s.peak_utilization > 1)) td.className = "hot"; tr.appendChild(td); });
  tb.appendChild(tr);
  while (tb.rows.length > MAX_STEP_ROWS) tb.deleteRow(0);
  const box = tb.closest(".scroll"); box.scrollTop = box.scrollHeight;
}

function addLine(cls, sev, text) {
  const ol = $("alarms");
  const li = document.createElement("li");
  li.className = cls;
  const b = document.createElement("span"); b.className = "sev"; b.textContent = sev;
  li.appendChild(b); li.appendChild(document.createTextNode(text));
  ol.appendChild(li);
  while (ol.children.length > MAX_ALARM_ROWS) ol.removeChild(ol.firstChild);
  ol.scrollTop = ol.scrollHeight;
}

function onState(m) {
  const el = $("state");
  el.dataset.state = m.state;
  el.dataset.outcome = m.outcome || "";
  el.textContent = m.state + (m.outcome && m.state !== m.outcome ? " · " + m.outcome : "");
  if (m.firmware) $("firmware").textContent = m.firmware;
  if (m.summary) {
    const s = m.summary;
    $("summary").textContent = "run ended " + (m.outcome || "") + (m.reason ? " (" + m.reason + ")" : "") + ": " + s.steps + " steps, " +
      s.ticks + " ticks, " + (s.sim_time_s === null ? "—" : s.sim_time_s.toFixed(3)) + " s simulated, peak friction utilization " +
      cell(s.peak_friction_utilization, 3) + ", least normal force " + cell(s.min_normal_force_n, 1) + " N, mean speed " +
      cell(s.mean_speed_mps, 3) + " m/s" + (s.run_folder ? " · run folder " + s.run_folder : "");
  } else if (m.reason) {
    $("summary").textContent = m.reason;
  }
}

function onSetup(s) {
  setup = s; verts = vertices();
  const p = s.plant;
  const shanks = p.legs.reduce((m, l) => m + (l.shank ? l.shank.mass_kg : 0), 0);
  weight = p.gravity_mps2 * (p.hip_mass_kg + p.legs[0].mass_kg + p.legs[1].mass_kg + shanks + (p.torso ? p.torso.mass_kg : 0));
  $("caution").textContent = s.caution;
  $("scenario").textContent = s.scenario;
  $("clock").textContent = s.clock + " · " + s.tick_hz + " Hz";
  $("link").textContent = s.link ? "link " + s.link : "";
  $("link").hidden = !s.link;
  $("mode").textContent = s.mode === "replay" ? "replay" : "live view";
  $("lat-note").textContent = s.clock === "lockstep" ? "(lockstep runs in virtual time: no round trip or jitter to show)" : "";
  if (s.greeting && s.greeting.name) $("firmware").textContent = "firmware " + s.greeting.name + " build " + s.greeting.build + " (protocol v" + s.greeting.protocol + ")";
  $("replay").hidden = s.mode !== "replay";
}

let playEnd = 0, seeking = false;
function onPlay(m) {
  playEnd = m.end || 0;
  $("playpause").textContent = m.paused ? "play" : "pause";
  $("playpause").dataset.paused = m.paused ? "1" : "0";
  if (!seeking) { $("seek").max = String(playEnd); $("seek").value = String(m.t); }
  const sp = $("speed");
  if (sp.value !== String(m.speed)) {
    if (![...sp.options].some((o) => o.value === String(m.speed))) sp.add(new Option(m.speed + "×", String(m.speed)));
    sp.value = String(m.speed);
  }
  $("playpos").textContent = (m.t || 0).toFixed(2) + " / " + playEnd.toFixed(2) + " s · " + m.speed + "×";
}

function onReset() {
  for (const k in series) delete series[k];
  $("steptable").tBodies[0].innerHTML = "";
  $("alarms").innerHTML = "";
}

function handle(m) {
  switch (m.type) {
    case "setup": onSetup(m); break;
    case "frame": onFrame(m); break;
    case "step": onStep(m); break;
    case "alarm": addLine(m.severity, m.severity + " " + m.kind, " t=" + cell(m.t_s, 3) + " s: " + m.message); break;
    case "note": addLine("note", "note", m.text); break;
    case "state": onState(m); break;
    case "drops": $("dropped").textContent = m.dropped; break;
    case "play": onPlay(m); break;
    case "reset": onReset(); break;
  }
}

function control(body) {
  return fetch("control" + q, { method: "POST", headers: { "Content-Type": "application/json" }, body: JSON.stringify(body) });
}
$("playpause").addEventListener("click", () => control({ pause: $("playpause").dataset.paused !== "1" }));
$("speed").addEventListener("change", () => control({ speed: Number($("speed").value) }));
$("seek").addEventListener("input", () => { seeking = true; });
$("seek").addEventListener("change", () => { seeking = false; control({ seek: Number($("seek").value) }); });

let dirty = false;
function paint() {
  if (dirty) { dirty = false; drawWalker(); drawCharts(); }
  requestAnimationFrame(paint);
}
requestAnimationFrame(paint);
window.addEventListener("resize", () => { dirty = true; });

let es = null;
function connect() {
  es = new EventSource("events" + q);
  es.onmessage = (e) => handle(JSON.parse(e.data));
  es.onerror = () => {
    // After the run the rig closes the stream; the page keeps what it drew.
    if ($("state").dataset.state === "done") es.close();
  };
}
connect();

// failframe review page. Plain script, no libraries, works offline.
// Image coordinates follow OpenCV: pixel centres on integers, so a click at
// display offset d with display scale s (display px per image px) is at d/s - 0.5.
"use strict";

const $ = (id) => document.getElementById(id);

const S = {
  info: null,
  report: null,
  load: null,
  frame: 0,        // the frame asked for
  shown: -1,       // the frame in the <img>
  loading: false,
  overlay: null,   // /api/tracks answer for the shown frame
  overlayCache: new Map(),
  playing: false,
  play: null,
  marking: false,
  marks: null,     // the marks being edited
  dirty: false,
  sel: -1,         // selected point index
  chosen: [],      // point ids chosen for a member, in order
  hover: null,     // image coordinates under the mouse
  geom: { left: 0, top: 0, scale: 1 },
};

const SLOWDOWNS = [1, 2, 5, 10, 20, 50, 100, 200, 500, 1000, 2000];

// ---------- helpers ----------

function status(msg, isError) {
  const el = $("status");
  el.textContent = msg;
  el.classList.toggle("error", !!isError);
}

async function api(path, opts) {
  const res = await fetch(path, opts);
  const ct = res.headers.get("Content-Type") || "";
  const body = ct.startsWith("application/json") ? await res.json() : null;
  if (!res.ok) {
    throw new Error((body && body.error) || res.status + " " + res.statusText);
  }
  return body;
}

function clampFrame(n) {
  const last = S.info ? S.info.frames - 1 : 0;
  return Math.max(0, Math.min(last, Math.round(n)));
}

function timeOf(frame) { return frame / S.info.capture_fps; }

function fmtTime(t) {
  if (Math.abs(t) < 1) return (t * 1000).toFixed(2) + " ms";
  return t.toFixed(4) + " s";
}

function loadAt(t) {
  const L = S.load;
  if (!L || !L.time_s.length || t < L.time_s[0] || t > L.time_s[L.time_s.length - 1]) return null;
  let lo = 0, hi = L.time_s.length - 1;
  while (hi - lo > 1) {
    const m = (lo + hi) >> 1;
    if (L.time_s[m] <= t) lo = m; else hi = m;
  }
  const t0 = L.time_s[lo], t1 = L.time_s[hi];
  if (t1 === t0) return L.load_g[lo];
  return L.load_g[lo] + (L.load_g[hi] - L.load_g[lo]) * (t - t0) / (t1 - t0);
}

// ---------- start ----------

async function start() {
  try {
    S.info = await api("/api/info");
  } catch (e) {
    status("cannot reach the review server: " + e.message, true);
    return;
  }
  const I = S.info;
  $("clipFacts").textContent =
    `${I.clip} · ${I.width}×${I.height} · ${I.frames} frames · ${I.capture_fps} fps (${I.capture_fps_from})`;
  document.title = "failframe review · " + I.clip;
  if (I.warnings && I.warnings.length) {
    $("warnings").hidden = false;
    $("warnings").textContent = I.warnings.join(" · ");
  }
  $("frameNo").max = I.frames - 1;
  $("frameCount").textContent = "/ " + (I.frames - 1);
  $("scrub").max = I.frames - 1;
  $("stillBtn").disabled = !I.can_save_still;
  $("bowHighLabel").textContent = "≥ " + (I.bow_high * 100).toFixed(0) + " %";
  $("marksFile").textContent = "file: " + I.marks_file + (I.marks_exists ? "" : " (new)");
  fillSlowdowns();

  if (I.has_result) {
    try { S.report = await api("/api/report"); } catch (e) { status(e.message, true); }
  }
  if (I.has_load) {
    try { S.load = await api("/api/load"); } catch (e) { status(e.message, true); }
  }
  try {
    S.marks = normaliseMarks(await api("/api/marks"));
  } catch (e) {
    // Never overwrite a marks file that could not be read.
    status("marks file could not be read, so saving is off: " + e.message, true);
    S.marks = normaliseMarks({});
    S.marksBroken = true;
    $("saveMarks").disabled = true;
  }
  if (!I.has_tracks) {
    $("ovPoints").disabled = true;
    $("ovMembers").disabled = true;
  } else {
    // The tracked points already sit on the marks in the reference frame.
    $("ovMarks").checked = false;
  }
  renderEvents();
  renderMarks();
  bind();
  layout();
  show(0);
}

function fillSlowdowns() {
  const sel = $("slowdown");
  const fps = S.info.capture_fps;
  let best = SLOWDOWNS[0];
  for (const k of SLOWDOWNS) {
    const o = document.createElement("option");
    o.value = k;
    o.textContent = k === 1 ? "real time" : k + "× slower";
    sel.appendChild(o);
    if (fps / k >= 12) best = k; // aim for at least 12 frames a second shown
  }
  sel.value = best;
}

// ---------- frame display ----------

function show(n) {
  if (!S.info) return;
  S.frame = clampFrame(n);
  updateReadout();
  fetchFrame();
}

function fetchFrame() {
  if (S.loading || S.shown === S.frame) return;
  const want = S.frame;
  S.loading = true;
  const img = $("frameImg");
  const ov = needOverlay(want);
  const pic = new Image();
  pic.onload = async () => {
    await ov;
    img.src = pic.src;
    img.classList.remove("missing");
    img.dataset.frame = String(want);
    S.shown = want;
    S.loading = false;
    S.overlay = S.overlayCache.get(want) || null;
    if (img.naturalWidth && !img.style.width) layout();
    draw();
    if (S.frame !== S.shown) fetchFrame();
    else if (!S.playing && want + 1 < S.info.frames) prefetch(want + 1);
  };
  pic.onerror = () => {
    S.loading = false;
    img.classList.add("missing");
    img.dataset.frame = "-1";
    fetch(pic.src).then((r) => r.json()).then((b) => status(b.error, true))
      .catch(() => status("frame " + want + " could not be shown", true));
    if (S.frame !== want) fetchFrame();
  };
  pic.src = "/api/frame/" + want + ".jpg";
}

// prefetch asks for a frame ahead so that the server decodes it while the
// user looks at this one; stepping on is then immediate.
function prefetch(n) {
  const p = new Image();
  p.src = "/api/frame/" + n + ".jpg";
  needOverlay(n);
}

function needOverlay(n) {
  if (!S.info.has_tracks || S.overlayCache.has(n)) return Promise.resolve();
  return api("/api/tracks?frame=" + n).then((o) => {
    S.overlayCache.set(n, o);
    if (S.overlayCache.size > 400) S.overlayCache.delete(S.overlayCache.keys().next().value);
  }).catch(() => {});
}

function updateReadout() {
  const f = S.frame;
  const fn = $("frameNo");
  if (document.activeElement !== fn) fn.value = f;
  $("scrub").value = f;
  const t = timeOf(f);
  $("timeLabel").textContent = "t = " + fmtTime(t);
  const g = loadAt(t);
  $("loadLabel").textContent = g === null ? (S.load ? "load –" : "") : "load " + g.toFixed(0) + " g";
  $("refFrame").textContent = S.marks ? S.marks.reference_frame : "–";
  document.querySelectorAll("#events li").forEach((li) => {
    li.classList.toggle("here", Number(li.dataset.frame) === f);
  });
  drawChart();
}

// layout fits the frame into the stage, keeping its aspect ratio.
function layout() {
  if (!S.info) return;
  const stage = $("stage");
  const W = stage.clientWidth, H = stage.clientHeight;
  const scale = Math.min(W / S.info.width, H / S.info.height);
  const w = S.info.width * scale, h = S.info.height * scale;
  const left = (W - w) / 2, top = (H - h) / 2;
  for (const el of [$("frameImg"), $("overlay")]) {
    el.style.left = left + "px";
    el.style.top = top + "px";
    el.style.width = w + "px";
    el.style.height = h + "px";
  }
  // Enlarged frames show their pixels sharp for marking; reduced ones smooth.
  $("frameImg").style.imageRendering = scale >= 1 ? "pixelated" : "auto";
  const dpr = window.devicePixelRatio || 1;
  const c = $("overlay");
  c.width = Math.round(w * dpr);
  c.height = Math.round(h * dpr);
  S.geom = { left, top, scale, w, h, dpr };
  draw();
  drawChart();
}

// toImage turns a mouse event over the overlay into image coordinates.
function toImage(ev) {
  const r = $("overlay").getBoundingClientRect();
  const s = r.width / S.info.width;
  return { x: (ev.clientX - r.left) / s - 0.5, y: (ev.clientY - r.top) / s - 0.5 };
}

// ---------- overlay drawing ----------

function draw() {
  const c = $("overlay");
  const ctx = c.getContext("2d");
  ctx.setTransform(1, 0, 0, 1, 0, 0);
  ctx.clearRect(0, 0, c.width, c.height);
  if (!S.info) return;
  const k = S.geom.scale * S.geom.dpr;
  const P = (x, y) => [(x + 0.5) * k, (y + 0.5) * k];
  const dpr = S.geom.dpr;
  const O = S.overlay;
  if (O && O.tracked && !S.marking) {
    const pos = new Map();
    for (const p of O.points) if (p.x !== null && p.x !== undefined) pos.set(p.id, p);
    if ($("ovMembers").checked) {
      for (const m of O.members) {
        const pts = m.points.map((id) => pos.get(id));
        if (m.first) strokePath(ctx, pts, P, "#ffffff", 7 * dpr, []);
        strokePath(ctx, pts, P, m.color, 3 * dpr, []);
      }
    }
    if ($("ovPoints").checked) {
      for (const p of O.points) {
        if (p.x === null || p.x === undefined) continue;
        const [x, y] = P(p.x, p.y);
        ctx.strokeStyle = "#50dcff";
        ctx.lineWidth = 1.5 * dpr;
        ctx.beginPath();
        ctx.arc(x, y, 4 * dpr, 0, 2 * Math.PI);
        ctx.stroke();
        if ($("ovLabels").checked) label(ctx, p.id, x, y, "#50dcff");
      }
    }
  }
  const M = S.marks;
  const showMarks = S.marking || ($("ovMarks").checked && M && S.frame === M.reference_frame);
  if (M && showMarks) {
    const byId = new Map(M.points.map((p) => [p.id, p]));
    for (const m of M.members) {
      const pts = m.points.map((id) => byId.get(id)).map((p) => p && { x: p.px[0], y: p.px[1] });
      strokePath(ctx, pts, P, m.kind === "leg" ? "#4fb3ff" : m.kind === "block" ? "#c77dff" : "#f0b014", 2 * dpr, [6 * dpr, 4 * dpr]);
    }
    M.points.forEach((p, i) => {
      const [x, y] = P(p.px[0], p.px[1]);
      const sel = i === S.sel;
      const chosen = S.chosen.indexOf(p.id);
      ctx.strokeStyle = sel ? "#ffffff" : chosen >= 0 ? "#f0b014" : "#ffd24a";
      ctx.lineWidth = (sel ? 2 : 1.5) * dpr;
      const r = (sel ? 9 : 7) * dpr;
      ctx.beginPath();
      ctx.moveTo(x - r, y); ctx.lineTo(x - 2 * dpr, y);
      ctx.moveTo(x + 2 * dpr, y); ctx.lineTo(x + r, y);
      ctx.moveTo(x, y - r); ctx.lineTo(x, y - 2 * dpr);
      ctx.moveTo(x, y + 2 * dpr); ctx.lineTo(x, y + r);
      ctx.stroke();
      label(ctx, p.id + (chosen >= 0 ? " #" + (chosen + 1) : ""), x, y, ctx.strokeStyle);
    });
  }
  drawLoupe();
}

function strokePath(ctx, pts, P, color, width, dash) {
  ctx.strokeStyle = color;
  ctx.lineWidth = width;
  ctx.lineCap = "round";
  ctx.setLineDash(dash);
  ctx.beginPath();
  let pen = false;
  for (const p of pts) {
    if (!p) { pen = false; continue; }
    const [x, y] = P(p.x, p.y);
    if (pen) ctx.lineTo(x, y); else ctx.moveTo(x, y);
    pen = true;
  }
  ctx.stroke();
  ctx.setLineDash([]);
}

function label(ctx, text, x, y, color) {
  const dpr = S.geom.dpr;
  ctx.font = `${12 * dpr}px system-ui, sans-serif`;
  ctx.lineWidth = 3 * dpr;
  ctx.strokeStyle = "rgba(0,0,0,.75)";
  ctx.strokeText(text, x + 8 * dpr, y - 6 * dpr);
  ctx.fillStyle = color;
  ctx.fillText(text, x + 8 * dpr, y - 6 * dpr);
}

// ---------- loupe ----------

const LOUPE_ZOOM = 10; // loupe pixels per image pixel

function loupeCentre() {
  if (S.hover) return S.hover;
  if (S.sel >= 0 && S.marks.points[S.sel]) {
    const p = S.marks.points[S.sel];
    return { x: p.px[0], y: p.px[1] };
  }
  return null;
}

function drawLoupe() {
  const c = $("loupe");
  const ctx = c.getContext("2d");
  ctx.fillStyle = "#000";
  ctx.fillRect(0, 0, c.width, c.height);
  const img = $("frameImg");
  const ctr = loupeCentre();
  if (!ctr || !img.naturalWidth) return;
  S.loupeCentre = { x: ctr.x, y: ctr.y };
  const half = c.width / 2 / LOUPE_ZOOM;
  ctx.imageSmoothingEnabled = false;
  // Image coordinate u lies at source-pixel position u + 0.5.
  ctx.drawImage(img, ctr.x - half + 0.5, ctr.y - half + 0.5, 2 * half, 2 * half, 0, 0, c.width, c.height);
  const L = (x, y) => [(x - ctr.x + half) * LOUPE_ZOOM, (y - ctr.y + half) * LOUPE_ZOOM];
  ctx.strokeStyle = "rgba(255,255,255,.5)";
  ctx.lineWidth = 1;
  ctx.beginPath();
  ctx.moveTo(c.width / 2, 0); ctx.lineTo(c.width / 2, c.height);
  ctx.moveTo(0, c.height / 2); ctx.lineTo(c.width, c.height / 2);
  ctx.stroke();
  if (S.marks && (S.marking || S.frame === S.marks.reference_frame)) {
    S.marks.points.forEach((p, i) => {
      const [x, y] = L(p.px[0], p.px[1]);
      if (x < -10 || y < -10 || x > c.width + 10 || y > c.height + 10) return;
      for (const [color, width] of [["rgba(0,0,0,.8)", 4], [i === S.sel ? "#50dcff" : "#ffd24a", 2]]) {
        ctx.strokeStyle = color;
        ctx.lineWidth = width;
        ctx.beginPath();
        ctx.arc(x, y, 7, 0, 2 * Math.PI);
        ctx.moveTo(x - 3, y); ctx.lineTo(x + 3, y);
        ctx.moveTo(x, y - 3); ctx.lineTo(x, y + 3);
        ctx.stroke();
      }
    });
  }
}

function loupeClick(ev) {
  if (!S.marking || S.sel < 0 || !S.loupeCentre) {
    status("choose a point first, then click in the loupe to refine it");
    return;
  }
  const c = $("loupe");
  const r = c.getBoundingClientRect();
  const lx = (ev.clientX - r.left) * (c.width / r.width);
  const ly = (ev.clientY - r.top) * (c.height / r.height);
  const half = c.width / 2 / LOUPE_ZOOM;
  const x = S.loupeCentre.x - half + lx / LOUPE_ZOOM;
  const y = S.loupeCentre.y - half + ly / LOUPE_ZOOM;
  movePoint(S.sel, x, y);
}

// ---------- events, chart, scrubber ----------

function renderEvents() {
  const R = S.report;
  const ol = $("events");
  ol.innerHTML = "";
  if (!R) {
    $("summary").textContent = S.info.report ? "report.json not found in the report folder" : "No report folder given (--report).";
    return;
  }
  const bits = [];
  if (R.failure_mode) bits.push("mode <b>" + esc(R.failure_mode.replace(/_/g, " ")) + "</b>");
  if (R.first_member) bits.push("first to go <b>" + esc(R.first_member) + "</b>");
  if (R.peak_load_g != null) bits.push("peak <b>" + R.peak_load_g.toFixed(0) + " g</b>");
  if (R.efficiency != null) bits.push("efficiency <b>" + R.efficiency.toFixed(0) + "</b>");
  let html = bits.join(" · ") + (R.account ? "<br>" + esc(R.account) : "");
  if (R.advice && R.advice.length) {
    html += "<ul class='advice'>" + R.advice.map((a) => "<li>" + esc(a) + "</li>").join("") + "</ul>";
  }
  if (S.info.has_html) html += `<a href="/files/report.html" target="_blank" rel="noopener">open the full report</a>`;
  $("summary").innerHTML = html;
  const ticks = $("ticks");
  ticks.innerHTML = "";
  for (const ev of R.events || []) {
    const li = document.createElement("li");
    li.className = "event";
    li.dataset.frame = ev.frame;
    const load = ev.load_g != null ? " · " + ev.load_g.toFixed(0) + " g" : "";
    li.innerHTML = `<span class="kind ${esc(ev.kind)}">${esc(ev.kind.replace(/_/g, " "))}</span>` +
      `<span>${esc(ev.member || "whole tower")}</span>` +
      `<span class="when">frame ${ev.frame} · ${fmtTime(ev.time_s)}${load}</span>` +
      (ev.detail ? `<span class="detail">${esc(ev.detail)}</span>` : "");
    li.title = "go to frame " + ev.frame;
    li.addEventListener("click", () => { stopPlay(); show(ev.frame); });
    ol.appendChild(li);
    const tk = document.createElement("span");
    tk.className = ev.kind;
    tk.style.left = (100 * ev.frame / Math.max(1, S.info.frames - 1)) + "%";
    tk.title = ev.kind + " " + (ev.member || "") + " @ " + ev.frame;
    ticks.appendChild(tk);
  }
}

function esc(s) {
  return String(s).replace(/[&<>"']/g, (c) => ({ "&": "&amp;", "<": "&lt;", ">": "&gt;", '"': "&quot;", "'": "&#39;" }[c]));
}

function chartGeom() {
  const c = $("chart");
  const dpr = window.devicePixelRatio || 1;
  const w = c.clientWidth, h = c.clientHeight;
  if (c.width !== Math.round(w * dpr)) c.width = Math.round(w * dpr);
  if (c.height !== Math.round(h * dpr)) c.height = Math.round(h * dpr);
  return { c, dpr, w, h, padL: 52, padR: 10, padT: 8, padB: 20 };
}

function drawChart() {
  if (!S.info) return;
  const G = chartGeom();
  const ctx = G.c.getContext("2d");
  ctx.setTransform(G.dpr, 0, 0, G.dpr, 0, 0);
  ctx.clearRect(0, 0, G.w, G.h);
  const tEnd = timeOf(S.info.frames - 1) || 1;
  const X = (t) => G.padL + (t / tEnd) * (G.w - G.padL - G.padR);
  const note = $("chartNote");
  ctx.font = "11px system-ui, sans-serif";
  ctx.fillStyle = "#9aa3af";
  ctx.strokeStyle = "#353b45";
  ctx.lineWidth = 1;
  // time axis
  ctx.beginPath();
  ctx.moveTo(G.padL, G.h - G.padB + 0.5); ctx.lineTo(G.w - G.padR, G.h - G.padB + 0.5);
  ctx.stroke();
  for (const t of niceTicks(0, tEnd, 8)) {
    const x = X(t);
    ctx.fillText(fmtTime(t), x - 14, G.h - 5);
    ctx.beginPath(); ctx.moveTo(x + 0.5, G.h - G.padB); ctx.lineTo(x + 0.5, G.h - G.padB + 4); ctx.stroke();
  }
  if (S.load && S.load.time_s.length) {
    note.textContent = "";
    const gs = S.load.load_g;
    let gMin = Math.min(0, ...gs), gMax = Math.max(...gs);
    if (gMax <= gMin) gMax = gMin + 1;
    const Y = (g) => G.padT + (1 - (g - gMin) / (gMax - gMin)) * (G.h - G.padT - G.padB);
    for (const g of niceTicks(gMin, gMax, 4)) {
      const y = Y(g);
      ctx.fillText(g.toFixed(0) + " g", 4, y + 4);
      ctx.strokeStyle = "#262b33";
      ctx.beginPath(); ctx.moveTo(G.padL, y + 0.5); ctx.lineTo(G.w - G.padR, y + 0.5); ctx.stroke();
    }
    ctx.save();
    ctx.beginPath();
    ctx.rect(G.padL, 0, G.w - G.padL - G.padR, G.h);
    ctx.clip();
    ctx.strokeStyle = "#f0b014";
    ctx.lineWidth = 1.5;
    ctx.beginPath();
    S.load.time_s.forEach((t, i) => {
      const x = X(t), y = Y(gs[i]);
      if (i === 0) ctx.moveTo(x, y); else ctx.lineTo(x, y);
    });
    ctx.stroke();
    ctx.restore();
  } else {
    note.textContent = S.info.report ? "no load.csv in the report folder" : "load chart: give --report with an aligned load log";
  }
  // event ticks
  if (S.report) {
    for (const ev of S.report.events || []) {
      ctx.strokeStyle = ev.kind === "break" || ev.kind === "collapse" ? "#e23c34" : "#8a7a40";
      ctx.setLineDash([3, 3]);
      const x = X(ev.time_s != null ? ev.time_s : timeOf(ev.frame));
      ctx.beginPath(); ctx.moveTo(x + 0.5, G.padT); ctx.lineTo(x + 0.5, G.h - G.padB); ctx.stroke();
      ctx.setLineDash([]);
    }
  }
  // cursor
  const x = X(timeOf(S.frame));
  ctx.strokeStyle = "#4fb3ff";
  ctx.lineWidth = 2;
  ctx.beginPath(); ctx.moveTo(x, 0); ctx.lineTo(x, G.h - G.padB); ctx.stroke();
}

function niceTicks(lo, hi, n) {
  const span = hi - lo;
  if (!(span > 0)) return [lo];
  const raw = span / n;
  const mag = Math.pow(10, Math.floor(Math.log10(raw)));
  const step = [1, 2, 5, 10].map((m) => m * mag).find((s) => s >= raw) || raw;
  const out = [];
  for (let v = Math.ceil(lo / step) * step; v <= hi + 1e-9; v += step) out.push(+v.toPrecision(12));
  return out;
}

function chartClick(ev) {
  const G = chartGeom();
  const r = G.c.getBoundingClientRect();
  const x = ev.clientX - r.left;
  const tEnd = timeOf(S.info.frames - 1) || 1;
  const t = ((x - G.padL) / (G.w - G.padL - G.padR)) * tEnd;
  stopPlay();
  show(Math.round(t * S.info.capture_fps));
}

// ---------- playback ----------

function togglePlay() { S.playing ? stopPlay() : startPlay(); }

function startPlay() {
  if (S.frame >= S.info.frames - 1) show(0);
  S.playing = true;
  $("playBtn").textContent = "Pause";
  S.play = { t0: performance.now(), f0: S.frame };
  requestAnimationFrame(tick);
}

function stopPlay() {
  S.playing = false;
  $("playBtn").textContent = "Play";
}

function tick(now) {
  if (!S.playing) return;
  const slow = Number($("slowdown").value);
  const rate = S.info.capture_fps / slow; // frames per wall-clock second
  const f = S.play.f0 + Math.floor(((now - S.play.t0) / 1000) * rate);
  if (f >= S.info.frames - 1) {
    show(S.info.frames - 1);
    stopPlay();
    return;
  }
  if (f !== S.frame) show(f);
  requestAnimationFrame(tick);
}

function changeSlowdown(dir) {
  const sel = $("slowdown");
  const i = SLOWDOWNS.indexOf(Number(sel.value));
  const j = Math.max(0, Math.min(SLOWDOWNS.length - 1, i + dir));
  sel.value = SLOWDOWNS[j];
  if (S.playing) S.play = { t0: performance.now(), f0: S.frame };
}

// ---------- marks editing ----------

function normaliseMarks(m) {
  return {
    clip: m.clip || "",
    capture_fps: m.capture_fps || 0,
    reference_frame: m.reference_frame || 0,
    camera: m.camera || null,
    tower: m.tower || null,
    scale: m.scale || null,
    points: (m.points || []).map((p) => ({
      id: p.id, px: [p.px[0], p.px[1]], leg: p.leg || "",
      level: p.level === undefined ? null : p.level,
      plan_mm: p.plan_mm || null,
    })),
    members: (m.members || []).map((x) => ({ id: x.id, kind: x.kind, points: x.points.slice() })),
  };
}

function setMarking(on) {
  S.marking = on;
  $("markToggle").setAttribute("aria-pressed", String(on));
  $("markToggle").textContent = on ? "Stop marking" : "Start marking";
  $("stage").classList.toggle("marking", on);
  $("modeBadge").hidden = !on;
  if (on) {
    $("markBox").open = true;
    $("markBox").scrollIntoView({ block: "start" });
    stopPlay();
    if (S.marks.points.length && S.frame !== S.marks.reference_frame) {
      show(S.marks.reference_frame);
      status("marks belong to reference frame " + S.marks.reference_frame);
    }
  }
  draw();
}

function touch() {
  S.dirty = true;
  $("saveMarks").textContent = "Save marks *";
  renderMarks();
  draw();
}

function nextPointId() {
  const used = new Set(S.marks.points.map((p) => p.id));
  for (let i = 1; ; i++) if (!used.has("P" + i)) return "P" + i;
}

function nearestPoint(x, y, radiusImg) {
  let best = -1, bd = radiusImg;
  S.marks.points.forEach((p, i) => {
    const d = Math.hypot(p.px[0] - x, p.px[1] - y);
    if (d <= bd) { bd = d; best = i; }
  });
  return best;
}

function stageClick(ev) {
  if (!S.marking) return;
  const { x, y } = toImage(ev);
  const M = S.marks;
  const hit = nearestPoint(x, y, 8 / S.geom.scale);
  if (hit >= 0) {
    const id = M.points[hit].id;
    if (ev.shiftKey) {
      const k = S.chosen.indexOf(id);
      if (k >= 0) S.chosen.splice(k, 1); else S.chosen.push(id);
    }
    S.sel = hit;
    renderMarks();
    draw();
    return;
  }
  if (M.points.length && S.frame !== M.reference_frame) {
    status("points are marked on reference frame " + M.reference_frame + " (press G to go there)", true);
    return;
  }
  if (x < -0.5 || y < -0.5 || x > S.info.width - 0.5 || y > S.info.height - 0.5) return;
  if (!M.points.length) M.reference_frame = S.frame;
  const cx = Math.min(Math.max(x, 0), S.info.width - 1);
  const cy = Math.min(Math.max(y, 0), S.info.height - 1);
  M.points.push({ id: nextPointId(), px: [round3(cx), round3(cy)], leg: "", level: null, plan_mm: null });
  S.sel = M.points.length - 1;
  if (ev.shiftKey) S.chosen.push(M.points[S.sel].id);
  status(`placed ${M.points[S.sel].id} at (${cx.toFixed(2)}, ${cy.toFixed(2)}) px`);
  touch();
}

function round3(v) { return Math.round(v * 1000) / 1000; }

function movePoint(i, x, y) {
  const p = S.marks.points[i];
  p.px = [round3(Math.min(Math.max(x, 0), S.info.width - 1)), round3(Math.min(Math.max(y, 0), S.info.height - 1))];
  status(`moved ${p.id} to (${p.px[0].toFixed(2)}, ${p.px[1].toFixed(2)}) px`);
  touch();
}

function deletePoint(i) {
  const M = S.marks;
  const id = M.points[i].id;
  const used = M.members.filter((m) => m.points.includes(id)).map((m) => m.id);
  if (used.length) {
    status(`${id} is in ${used.join(", ")}; remove those members first`, true);
    return;
  }
  if (M.scale && (M.scale.from === id || M.scale.to === id)) M.scale = null;
  M.points.splice(i, 1);
  S.chosen = S.chosen.filter((c) => c !== id);
  S.sel = -1;
  touch();
}

function renamePoint(i, id) {
  const M = S.marks;
  id = id.trim();
  const old = M.points[i].id;
  if (!id || id === old) return true;
  if (M.points.some((p, j) => j !== i && p.id === id)) {
    status(`there is already a point named ${id}`, true);
    return false;
  }
  M.points[i].id = id;
  for (const m of M.members) m.points = m.points.map((q) => (q === old ? id : q));
  if (M.scale) {
    if (M.scale.from === old) M.scale.from = id;
    if (M.scale.to === old) M.scale.to = id;
  }
  S.chosen = S.chosen.map((q) => (q === old ? id : q));
  return true;
}

// derivedPlan mirrors marks.File.PlanOf: width tapers linearly from base to
// top, legs A-D at the corners (A = (-w/2, -w/2), counter-clockwise from above).
function derivedPlan(p) {
  const T = S.marks.tower;
  if (!T || !p.leg || p.level === null || !T.levels_mm || p.level >= T.levels_mm.length) return null;
  const z = T.levels_mm[p.level];
  const w = T.height_mm > 0 ? T.base_mm + (T.top_mm - T.base_mm) * z / T.height_mm : T.base_mm;
  const h = w / 2;
  return { A: [-h, -h], B: [h, -h], C: [h, h], D: [-h, h] }[p.leg] || null;
}

function deriveSelected() {
  const p = S.marks.points[S.sel];
  if (!p) return;
  const m = /^([A-D])(\d+)$/.exec(p.id);
  if (m) {
    if (!p.leg) p.leg = m[1];
    if (p.level === null) p.level = Number(m[2]);
  }
  readTower();
  const d = derivedPlan(p);
  if (!d) {
    status("need a leg, a level and the tower block (base, top, height, levels) to derive the plan position", true);
  } else {
    p.plan_mm = [round3(d[0]), round3(d[1])];
    status(`${p.id}: leg ${p.leg}, level ${p.level}, plan (${d[0].toFixed(1)}, ${d[1].toFixed(1)}) mm`);
  }
  touch();
}

function joinChosen() {
  const M = S.marks;
  if (S.chosen.length < 2) {
    status("shift+click at least two points, end to end, to join them", true);
    return;
  }
  const kind = $("memKind").value;
  let id = $("memId").value.trim();
  if (!id) id = suggestMemberId(kind);
  if (M.members.some((m) => m.id === id)) {
    status(`there is already a member named ${id}`, true);
    return;
  }
  M.members.push({ id, kind, points: S.chosen.slice() });
  status(`joined ${S.chosen.join(" – ")} into ${kind} ${id}`);
  S.chosen = [];
  $("memId").value = "";
  touch();
}

function suggestMemberId(kind) {
  const pts = S.chosen.map((id) => S.marks.points.find((p) => p.id === id));
  const legs = new Set(pts.map((p) => p && p.leg));
  if (kind === "leg" && legs.size === 1 && pts[0] && pts[0].leg) return "leg-" + pts[0].leg;
  if (kind === "block") return "block";
  const used = new Set(S.marks.members.map((m) => m.id));
  for (let i = 1; ; i++) if (!used.has(kind + i)) return kind + i;
}

function readTower() {
  const num = (id) => { const v = $(id).value.trim(); return v === "" ? null : Number(v); };
  const base = num("twBase"), top = num("twTop"), height = num("twHeight");
  const levels = $("twLevels").value.split(/[,\s]+/).filter(Boolean).map(Number);
  const M = S.marks;
  if (base === null && top === null && height === null && !levels.length) {
    M.tower = null;
  } else {
    M.tower = { base_mm: base || 0, top_mm: top === null ? base || 0 : top, height_mm: height || 0, levels_mm: levels };
  }
  const az = num("camAz");
  M.camera = az === null ? null : { azimuth_deg: az };
}

function setScale() {
  const from = $("scFrom").value, to = $("scTo").value, mm = Number($("scMM").value);
  if (!from || !to || from === to) { status("choose two different points for the scale", true); return; }
  if (!(mm > 0)) { status("give the true distance between them in mm", true); return; }
  S.marks.scale = { from, to, mm };
  touch();
}

function renderMarks() {
  const M = S.marks;
  const tb = $("pointTable").tBodies[0];
  tb.innerHTML = "";
  M.points.forEach((p, i) => {
    const tr = document.createElement("tr");
    const k = S.chosen.indexOf(p.id);
    if (i === S.sel) tr.classList.add("sel");
    if (k >= 0) { tr.classList.add("chosen"); tr.cells; }
    tr.innerHTML = `<td data-order="${k >= 0 ? "#" + (k + 1) : ""}">${esc(p.id)}</td><td>${p.px[0].toFixed(2)}</td>` +
      `<td>${p.px[1].toFixed(2)}</td><td>${esc(p.leg || "")}</td><td>${p.level === null ? "" : p.level}</td>` +
      `<td><button title="remove ${esc(p.id)}">×</button></td>`;
    tr.addEventListener("click", (ev) => {
      if (ev.target.tagName === "BUTTON") { deletePoint(i); return; }
      if (ev.shiftKey) {
        if (k >= 0) S.chosen.splice(k, 1); else S.chosen.push(p.id);
      }
      S.sel = i;
      renderMarks();
      draw();
    });
    tb.appendChild(tr);
  });
  // selected point editor
  const p = M.points[S.sel];
  $("pointEdit").disabled = !p;
  $("ptId").value = p ? p.id : "";
  $("ptLeg").value = p ? p.leg : "";
  $("ptLevel").value = p && p.level !== null ? p.level : "";
  $("ptPlanX").value = p && p.plan_mm ? p.plan_mm[0] : "";
  $("ptPlanY").value = p && p.plan_mm ? p.plan_mm[1] : "";
  const d = p && derivedPlan(p);
  $("ptDerived").textContent = d ? `from the tower block: (${d[0].toFixed(1)}, ${d[1].toFixed(1)}) mm` : "";
  // members
  $("joinList").textContent = S.chosen.length ? S.chosen.join(" – ") : "nothing chosen";
  const ul = $("memberList");
  ul.innerHTML = "";
  M.members.forEach((m, i) => {
    const li = document.createElement("li");
    li.innerHTML = `<span><b>${esc(m.id)}</b> ${esc(m.kind)}: ${esc(m.points.join(" – "))}</span><button title="remove member">×</button>`;
    li.querySelector("button").addEventListener("click", () => { M.members.splice(i, 1); touch(); });
    ul.appendChild(li);
  });
  // scale
  for (const [sel, cur] of [[$("scFrom"), M.scale && M.scale.from], [$("scTo"), M.scale && M.scale.to]]) {
    const keep = sel.value || cur || "";
    sel.innerHTML = "<option value=''>–</option>" + M.points.map((q) => `<option>${esc(q.id)}</option>`).join("");
    sel.value = cur || keep;
  }
  if (M.scale) {
    $("scMM").value = M.scale.mm;
    const a = M.points.find((q) => q.id === M.scale.from), b = M.points.find((q) => q.id === M.scale.to);
    if (a && b) {
      const d = Math.hypot(a.px[0] - b.px[0], a.px[1] - b.px[1]);
      $("scNote").textContent = `${M.scale.from}–${M.scale.to}: ${d.toFixed(2)} px = ${M.scale.mm} mm → ${(M.scale.mm / d).toFixed(4)} mm/px`;
    }
  } else {
    $("scNote").textContent = "no scale set";
  }
  // tower block
  const T = M.tower;
  if (document.activeElement === null || !document.activeElement.id.startsWith("tw")) {
    $("twBase").value = T ? T.base_mm : "";
    $("twTop").value = T ? T.top_mm : "";
    $("twHeight").value = T ? T.height_mm : "";
    $("twLevels").value = T ? T.levels_mm.join(", ") : "";
  }
  $("camAz").value = M.camera ? M.camera.azimuth_deg : $("camAz").value;
  $("refFrame").textContent = M.reference_frame;
}

async function saveMarks() {
  if (S.marksBroken) {
    status("the marks file could not be read when the page opened; fix or move it and reload before saving", true);
    return;
  }
  readTower();
  try {
    const saved = await api("/api/marks", {
      method: "PUT",
      headers: { "Content-Type": "application/json" },
      body: JSON.stringify(S.marks),
    });
    const selId = S.marks.points[S.sel] && S.marks.points[S.sel].id;
    S.marks = normaliseMarks(saved);
    S.sel = S.marks.points.findIndex((p) => p.id === selId);
    S.dirty = false;
    $("saveMarks").textContent = "Save marks";
    $("marksFile").textContent = "file: " + S.info.marks_file;
    status(`saved ${S.marks.points.length} points and ${S.marks.members.length} members`);
    document.body.dataset.saved = String(Date.now());
    renderMarks();
    draw();
  } catch (e) {
    status("not saved: " + e.message, true);
  }
}

async function saveStill() {
  try {
    const r = await api("/api/still", {
      method: "POST",
      headers: { "Content-Type": "application/json" },
      body: JSON.stringify({
        frame: S.frame,
        points: $("ovPoints").checked,
        members: $("ovMembers").checked,
        labels: $("ovLabels").checked,
      }),
    });
    status("still saved: " + r.file);
  } catch (e) {
    status("still not saved: " + e.message, true);
  }
}

// ---------- input ----------

function nextEvent(dir) {
  const evs = (S.report && S.report.events) || [];
  const frames = evs.map((e) => e.frame).sort((a, b) => a - b);
  const f = dir > 0 ? frames.find((x) => x > S.frame) : frames.reverse().find((x) => x < S.frame);
  if (f !== undefined) show(f);
}

function onKey(ev) {
  const tag = (ev.target.tagName || "").toLowerCase();
  if (tag === "input" || tag === "select" || tag === "textarea") {
    if (ev.key === "Escape") ev.target.blur();
    return;
  }
  const step = (n) => { stopPlay(); show(S.frame + n); };
  if (ev.altKey && S.marking && S.sel >= 0 && ev.key.startsWith("Arrow")) {
    const p = S.marks.points[S.sel];
    const d = { ArrowLeft: [-0.1, 0], ArrowRight: [0.1, 0], ArrowUp: [0, -0.1], ArrowDown: [0, 0.1] }[ev.key];
    movePoint(S.sel, p.px[0] + d[0], p.px[1] + d[1]);
    ev.preventDefault();
    return;
  }
  if ((ev.ctrlKey || ev.metaKey) && ev.key.toLowerCase() === "s") { saveMarks(); ev.preventDefault(); return; }
  if (ev.ctrlKey || ev.metaKey || ev.altKey) return;
  switch (ev.key) {
    case "ArrowRight": step(ev.shiftKey ? 10 : 1); break;
    case "ArrowLeft": step(ev.shiftKey ? -10 : -1); break;
    case "PageDown": step(100); break;
    case "PageUp": step(-100); break;
    case "Home": stopPlay(); show(0); break;
    case "End": stopPlay(); show(S.info.frames - 1); break;
    case " ": togglePlay(); break;
    case "[": changeSlowdown(1); break;
    case "]": changeSlowdown(-1); break;
    case "e": nextEvent(1); break;
    case "E": nextEvent(-1); break;
    case "m": case "M": setMarking(!S.marking); break;
    case "g": case "G": show(S.marks.reference_frame); break;
    case "j": case "J": if (S.marking) joinChosen(); break;
    case "Delete": case "Backspace": if (S.marking && S.sel >= 0) deletePoint(S.sel); break;
    case "Escape": S.sel = -1; S.chosen = []; renderMarks(); draw(); break;
    default: return;
  }
  ev.preventDefault();
}

function bind() {
  document.querySelectorAll("[data-step]").forEach((b) =>
    b.addEventListener("click", () => { stopPlay(); show(S.frame + Number(b.dataset.step)); }));
  $("playBtn").addEventListener("click", togglePlay);
  $("slowdown").addEventListener("change", () => { if (S.playing) S.play = { t0: performance.now(), f0: S.frame }; });
  $("frameNo").addEventListener("change", () => { stopPlay(); show(Number($("frameNo").value)); });
  $("scrub").addEventListener("input", () => { stopPlay(); show(Number($("scrub").value)); });
  $("chart").addEventListener("click", chartClick);
  for (const id of ["ovPoints", "ovMembers", "ovLabels", "ovMarks"]) $(id).addEventListener("change", draw);
  $("stillBtn").addEventListener("click", saveStill);
  $("markToggle").addEventListener("click", () => setMarking(!S.marking));
  $("saveMarks").addEventListener("click", saveMarks);
  $("gotoRef").addEventListener("click", () => show(S.marks.reference_frame));
  const ov = $("overlay");
  ov.addEventListener("click", stageClick);
  ov.addEventListener("mousemove", (ev) => { if (S.marking) { S.hover = toImage(ev); drawLoupe(); } });
  ov.addEventListener("mouseleave", () => { S.hover = null; drawLoupe(); });
  $("loupe").addEventListener("click", loupeClick);
  $("ptId").addEventListener("change", () => {
    if (S.sel >= 0 && !renamePoint(S.sel, $("ptId").value)) $("ptId").value = S.marks.points[S.sel].id;
    touch();
  });
  $("ptLeg").addEventListener("change", () => { if (S.sel >= 0) { S.marks.points[S.sel].leg = $("ptLeg").value; touch(); } });
  $("ptLevel").addEventListener("change", () => {
    if (S.sel < 0) return;
    const v = $("ptLevel").value.trim();
    S.marks.points[S.sel].level = v === "" ? null : Math.max(0, Math.round(Number(v)));
    touch();
  });
  for (const id of ["ptPlanX", "ptPlanY"]) {
    $(id).addEventListener("change", () => {
      if (S.sel < 0) return;
      const x = $("ptPlanX").value.trim(), y = $("ptPlanY").value.trim();
      S.marks.points[S.sel].plan_mm = x === "" || y === "" ? null : [Number(x), Number(y)];
      touch();
    });
  }
  $("ptDerive").addEventListener("click", deriveSelected);
  $("joinBtn").addEventListener("click", joinChosen);
  $("scSet").addEventListener("click", setScale);
  for (const id of ["twBase", "twTop", "twHeight", "twLevels", "camAz"]) {
    $(id).addEventListener("change", () => { readTower(); touch(); });
  }
  document.addEventListener("keydown", onKey);
  // Buttons and boxes give the keyboard back after a click, so that Space
  // plays rather than pressing the last button again.
  document.addEventListener("click", (ev) => {
    const el = ev.target;
    if (el.tagName === "BUTTON" || (el.tagName === "INPUT" && el.type === "checkbox")) el.blur();
  });
  window.addEventListener("resize", layout);
  window.addEventListener("beforeunload", (ev) => { if (S.dirty) { ev.preventDefault(); ev.returnValue = ""; } });
}

start();

// nullsteer control page: talks only to the JSON API under /api/ and follows /api/events.
"use strict";

const HEADERS = { "Content-Type": "application/json", "X-Nullsteer-Request": "1" };
const cards = new Map();      // device id -> { el, snap, patternKey }
let station = null;
// press -> page updated, for the benchmark (milliseconds, newest last)
window.nsTiming = { pressedAt: null, latencies: [] };

async function api(path, body) {
  const opts = body === undefined ? {} : { method: "POST", headers: HEADERS, body: JSON.stringify(body) };
  const res = await fetch("/api/" + path, opts);
  let data = null;
  try { data = await res.json(); } catch (e) { data = null; }
  if (!res.ok) throw new Error((data && data.error) || (res.status + " " + res.statusText));
  return data;
}

function $(card, role) { return card.querySelector(`[data-role="${role}"]`); }
function fmtDeg(x) { return Math.round(x) + "°"; }
function fmtOhm(x) { return x >= 10000 ? (x / 1000).toFixed(2) + " kΩ" : x.toFixed(1) + " Ω"; }

function nearestByRatio(table, ohms) {
  let best = null;
  for (const [mask, r] of table) {
    const d = Math.abs(Math.log(ohms / r));
    if (best === null || d < best.d) best = { mask, r, d };
  }
  return best && { mask: best.mask, ohms: best.r, errPct: 100 * (best.r - ohms) / ohms };
}

function say(card, text, kind) {
  const m = $(card, "msg");
  m.textContent = text || "";
  m.className = "msg" + (kind ? " " + kind : "");
}

async function command(id, verb, body) {
  const c = cards.get(id);
  const buttons = c.el.querySelectorAll("button");
  buttons.forEach(b => { b.disabled = true; });
  window.nsTiming.pressedAt = performance.now();
  try {
    const out = await api(`devices/${encodeURIComponent(id)}/${verb}`, body || {});
    say(c.el, (out.notes && out.notes.length) ? out.notes.join("; ") : "done", "ok");
    if (out.device) render(out.device);
  } catch (err) {
    window.nsTiming.pressedAt = null;
    say(c.el, err.message, "error");
  } finally {
    buttons.forEach(b => { b.disabled = false; });
    if (c.snap) applyAvailability(c.el, c.snap);
  }
}

function makeCard(id) {
  const el = document.getElementById("device-card").content.firstElementChild.cloneNode(true);
  el.dataset.device = id;
  $(el, "title").textContent = id;
  $(el, "flip").addEventListener("click", () => command(id, "flip"));
  $(el, "open").addEventListener("click", () => command(id, "set", { open: true }));
  $(el, "short").addEventListener("click", () => {
    const c = cards.get(id);
    command(id, "set", { short: !(c.snap && c.snap.short) });
  });
  const ohms = $(el, "ohms"), slider = $(el, "slider");
  ohms.addEventListener("input", () => showSnap(id));
  slider.addEventListener("input", () => {
    const t = cards.get(id).snap.table || [];
    if (t[slider.value]) { ohms.value = t[slider.value][1]; showSnap(id); }
  });
  $(el, "ohms-form").addEventListener("submit", ev => {
    ev.preventDefault();
    command(id, "set", { ohms: Number(ohms.value) });
  });
  $(el, "bearing-form").addEventListener("submit", ev => {
    ev.preventDefault();
    command(id, "set", { null_bearing_deg: Number($(el, "want-bearing").value) });
  });
  $(el, "freq").addEventListener("change", () => loadPattern(id, true));
  $(el, "autonull-form").addEventListener("submit", ev => {
    ev.preventDefault();
    const body = { freq_mhz: Number($(el, "an-freq").value) };
    const b = $(el, "an-bearing").value, save = $(el, "an-save").value.trim();
    if (b !== "") body.null_bearing_deg = Number(b);
    if (save) body.save_preset = save;
    $(el, "probes").replaceChildren();
    $(el, "an-result").textContent = "";
    api(`devices/${encodeURIComponent(id)}/autonull`, body)
      .then(() => say(el, "auto-null started", "ok"))
      .catch(err => say(el, err.message, "error"));
  });
  const freq = station ? station.default_freq_mhz : 1.83;
  $(el, "freq").value = freq.toFixed(3);
  $(el, "an-freq").value = (station ? station.autonull_freq_mhz : freq).toFixed(3);
  document.getElementById("devices").appendChild(el);
  const c = { el, snap: null, patternKey: null };
  cards.set(id, c);
  renderPresets(id);
  loadSchedule(id);
  return c;
}

function showSnap(id) {
  const c = cards.get(id), el = c.el;
  const v = Number($(el, "ohms").value);
  const out = $(el, "snap");
  const t = (c.snap && c.snap.table) || [];
  if (!(v > 0) || !t.length) { out.textContent = ""; return; }
  const n = nearestByRatio(t, v);
  const sign = n.errPct >= 0 ? "+" : "−";
  out.textContent = `→ ${fmtOhm(n.ohms)} (${sign}${Math.abs(n.errPct).toFixed(1)} %)`;
  const idx = t.findIndex(row => row[0] === n.mask);
  if (idx >= 0) $(el, "slider").value = idx;
}

function renderPresets(id) {
  const c = cards.get(id);
  if (!c || !station) return;
  const box = $(c.el, "presets");
  const names = station.presets.map(p => p.name).join("\n");
  if (box.dataset.names !== names) {   // rebuild only when the station's presets change
    box.dataset.names = names;
    box.replaceChildren();
    for (const p of station.presets) {
      const b = document.createElement("button");
      b.type = "button";
      b.textContent = p.name;
      b.dataset.preset = p.name;
      b.title = p.open ? "termination open" :
        `fed ${p.fed_end}, ${p.ohms} Ω` + (p.null_bearing_deg != null ? `, null ${fmtDeg(p.null_bearing_deg)}` : "");
      b.addEventListener("click", () => {
        const body = { name: p.name };
        const f = Number($(c.el, "freq").value);
        if (f > 0) body.freq_mhz = f;
        command(id, "preset", body);
      });
      box.appendChild(b);
    }
  }
  const now = (c.snap && c.snap.presets) || [];
  for (const b of box.querySelectorAll("button")) {
    b.setAttribute("aria-pressed", String(now.includes(b.dataset.preset)));
  }
}

function applyAvailability(el, snap) {
  const avail = $(el, "avail");
  avail.textContent = snap.available ? "online" : "not answering";
  avail.className = "pill " + (snap.available ? "on" : "off");
  const busy = $(el, "busy");
  busy.hidden = !snap.busy;
  busy.textContent = snap.busy || "";
  el.querySelectorAll(".state button, .more button").forEach(b => {
    b.disabled = !snap.available || !!snap.busy;
  });
}

function stateKey(s) { return [s.fed_end, s.mask, s.open, s.short, s.ohms].join("|"); }

function render(snap) {
  const c = cards.get(snap.id) || makeCard(snap.id);
  const el = c.el;
  const before = c.snap ? stateKey(c.snap) : null;
  c.snap = snap;
  applyAvailability(el, snap);
  if (!snap.available) {
    say(el, snap.error ? "board: " + snap.error : "board not answering", "error");
    return;
  }
  $(el, "bearing").textContent = snap.null_bearing_deg == null ? (snap.open ? "none" : "–") : fmtDeg(snap.null_bearing_deg);
  const other = snap.fed_end === "A" ? "B" : "A";
  $(el, "ends").textContent = snap.open ? `fed ${snap.fed_end}; termination open, no rear null`
    : `fed end ${snap.fed_end} · terminated end ${other}`;
  let term = snap.open ? "open" : `${fmtOhm(snap.ohms)} · mask ${snap.mask}`;
  if (snap.short) term = "shorted";
  $(el, "term").textContent = term;
  $(el, "preset-now").textContent = (snap.presets && snap.presets.length) ? snap.presets.join(" / ") : "custom";
  const up = snap.uptime_s >= 3600 ? (snap.uptime_s / 3600).toFixed(1) + " h" : Math.round(snap.uptime_s / 60) + " min";
  $(el, "diag").textContent = `firmware ${snap.firmware} · boot ${snap.boots} · up ${up}`;
  $(el, "short").hidden = !("short" in snap);
  $(el, "short").textContent = snap.short ? "Remove the short" : "Short the termination";
  const slider = $(el, "slider");
  slider.max = Math.max(0, (snap.table || []).length - 1);
  const ohms = $(el, "ohms");
  if (document.activeElement !== ohms && snap.ohms != null) { ohms.value = snap.ohms; showSnap(snap.id); }
  renderPresets(snap.id);
  const now = stateKey(snap);
  if (before !== now) {
    if (before !== null && window.nsTiming.pressedAt !== null) {
      window.nsTiming.latencies.push(performance.now() - window.nsTiming.pressedAt);
      window.nsTiming.pressedAt = null;
    }
    loadPattern(snap.id, false);
  }
}

async function loadPattern(id, force) {
  const c = cards.get(id);
  const f = Number($(c.el, "freq").value);
  const key = stateKey(c.snap || {}) + "@" + f;
  if (!force && key === c.patternKey) return;
  c.patternKey = key;
  try {
    const p = await api(`devices/${encodeURIComponent(id)}/pattern` + (f > 0 ? `?freq_mhz=${f}` : ""));
    if (c.patternKey !== key) return;
    $(c.el, "rose").innerHTML = p.svg;   // drawn by the service from numbers only
    $(c.el, "rose-text").textContent =
      `model at ${p.freq_mhz} MHz, ${p.elevation_deg}° elevation: deepest null ${fmtDeg(p.null_bearing_deg)}, ` +
      `${p.null_depth_db} dB below the peak`;
  } catch (err) {
    $(c.el, "rose-text").textContent = "pattern: " + err.message;
  }
}

async function loadSchedule(id) {
  const c = cards.get(id);
  try {
    const s = await api(`devices/${encodeURIComponent(id)}/schedule`);
    const list = $(c.el, "plan");
    list.replaceChildren();
    for (const a of s.next) {
      const li = document.createElement("li");
      const when = new Date(a.when);
      li.textContent = `${when.toLocaleString([], { weekday: "short", hour: "2-digit", minute: "2-digit" })} — ` +
        `${a.preset} (${a.target}; ${a.basis})`;
      list.appendChild(li);
    }
    if (!s.next.length) list.innerHTML = '<li class="muted">nothing planned in the next two days</li>';
  } catch (err) {
    $(c.el, "plan").textContent = "schedule: " + err.message;
  }
}

function autonullEvent(ev) {
  const c = cards.get(ev.device);
  if (!c) return;
  const list = $(c.el, "probes");
  if (ev.kind === "start") {
    list.replaceChildren();
    delete list.dataset.ref;
    $(c.el, "an-result").textContent = "running…";
    return;
  }
  if (ev.kind === "reference" || ev.kind === "probe" || ev.kind === "final") {
    const li = document.createElement("li");
    li.className = ev.kind;
    const name = document.createElement("span");
    name.textContent = ev.kind === "probe" ? `${ev.probe.order}. ${fmtOhm(ev.probe.ohms)}` : ev.kind;
    const bar = document.createElement("span");
    bar.className = "bar";
    const level = ev.kind === "probe" ? ev.probe.level_db : ev.level_db;
    // full width at the first reading (the reference), 2.5 % less per dB below it
    if (list.dataset.ref === undefined || !list.children.length) list.dataset.ref = level;
    const rel = level - Number(list.dataset.ref);
    bar.style.width = Math.max(2, Math.min(100, 100 + 2.5 * rel)) + "%";
    bar.title = `${rel.toFixed(1)} dB against the first reading`;
    const val = document.createElement("span");
    val.textContent = level.toFixed(1) + " dB";
    li.append(name, bar, val);
    list.appendChild(li);
    return;
  }
  const run = ev.run || {};
  if (ev.kind === "done" && run.result) {
    const r = run.result;
    $(c.el, "an-result").textContent = `best ${fmtOhm(r.best_ohms)} (mask ${r.best_mask})` +
      (r.null_db != null ? `, ${r.null_db} dB against the reversed direction` : "") +
      `, ${r.switchings} switchings` + (run.saved ? `; saved as ${run.saved}` : "");
  } else if (ev.kind === "failed") {
    $(c.el, "an-result").textContent = "auto-null failed: " + run.error;
  }
}

function connect() {
  const live = document.getElementById("live");
  const es = new EventSource("/api/events");
  es.addEventListener("open", () => { live.dataset.state = "live"; live.textContent = "live"; });
  es.addEventListener("error", () => { live.dataset.state = "lost"; live.textContent = "reconnecting"; });
  es.addEventListener("station", ev => {
    station = JSON.parse(ev.data);
    const site = station.site || {};
    document.getElementById("site-name").textContent = site.name || "nullsteer";
    document.getElementById("site-sub").textContent =
      [site.callsign, station.devices.length + (station.devices.length === 1 ? " antenna" : " antennas")]
        .filter(Boolean).join(" · ");
    document.title = (site.name || "nullsteer") + " · nullsteer";
    for (const id of station.devices) { if (!cards.has(id)) makeCard(id); else renderPresets(id); }
  });
  es.addEventListener("device", ev => render(JSON.parse(ev.data)));
  es.addEventListener("autonull", ev => autonullEvent(JSON.parse(ev.data)));
}

connect();

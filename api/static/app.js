"use strict";
// The fleet page: three views behind hash links (#/fleet, #/unit/<id>, #/alerts, #/alert/<id>),
// refreshed every POLL_MS without reloading. Figures arrive as text from the server, where one
// module holds the precision rules; plots are drawn with the vendored uPlot.
const POLL_MS = 15000;
const RANGES = { hour: 3600e3, day: 86400e3, week: 7 * 86400e3, month: 30 * 86400e3 };
// Health trends need weeks to show a trend: their plots never span less than this.
const TREND_MIN_MS = 14 * 86400e3;
// Health trends in 6-hour buckets: the fits behind them run every 6 hours at most.
const TREND_EVERY_S = 21600;
const MAIN_FIGURES = [
  ["module.resistance_25c_ohm", "Module resistance at 25 °C"], ["module.resistance_25c.change_pct", "Its change since commissioning"],
  ["module.resistance_25c.slope_pct_per_30d", "Its trend"], ["module.days_to_wear_limit", "Time to the wear limit"],
  ["cabinet.ua_w_per_k", "Cabinet heat-leak conductance UA"], ["cabinet.ua.change_pct", "UA change since commissioning"],
  ["cabinet.heat_leak_w", "Heat leaking in"], ["hot_side.resistance_k_per_w", "Hot-side sink resistance"],
  ["hot_side.resistance.change_pct", "Its change since commissioning"], ["performance.cop", "COP now"],
  ["performance.cop_max", "Best possible COP"], ["performance.cooling_w", "Heat pumped"], ["capacity.margin_w", "Cooling to spare at design ambient"],
];
const COLOURS = { cabinet: "#0f5c63", cold: "#3a7fb8", hot: "#b4532a", ambient: "#7c7466", limit: "#a12f24",
                  base: "#6d7a80", extra: "#8a5a00" };
const state = { key: localStorage.getItem("tecfleet.key") || "", fleet: null, sort: ["alerts", -1],
                range: "day", plots: {}, unit: null, busy: false };
const $ = (sel) => document.querySelector(sel);
const esc = (s) => String(s ?? "").replace(/[&<>"']/g, (c) => ({ "&": "&amp;", "<": "&lt;", ">": "&gt;", "\"": "&quot;", "'": "&#39;" }[c]));

async function api(path, options = {}) {
  const response = await fetch(path, { ...options, headers: { "Authorization": "Bearer " + state.key, ...(options.headers || {}) } });
  if (response.status === 401) throw new Error("the API key was refused");
  if (!response.ok) {
    const body = await response.json().catch(() => ({}));
    const e = new Error(path.split("?")[0] + ": " + (body.message || "HTTP " + response.status));
    e.status = response.status;
    throw e;
  }
  return options.raw ? response : response.json();
}

function say(text, isError = false) { $("#status").textContent = text; $("#status").classList.toggle("error", isError); }

function ago(iso) {
  if (!iso) return "never";
  const s = (Date.now() - Date.parse(iso)) / 1000;
  if (s < 90) return Math.max(0, Math.round(s)) + " s ago";
  if (s < 5400) return Math.round(s / 60) + " min ago";
  if (s < 172800) return Math.round(s / 3600) + " h ago";
  return Math.round(s / 86400) + " d ago";
}

function figure(f) {
  if (!f) return '<span class="doubt">not enough data</span>';
  return f.reliable ? esc(f.text) : `<span class="doubt" title="not yet reliable">${esc(f.text)}<span class="sr"> (not yet reliable)</span></span>`;
}

// ---- routing ---------------------------------------------------------------------------
function route() {
  const parts = location.hash.replace(/^#\/?/, "").split("/");
  if (parts[2] in RANGES) state.range = parts[2];
  return { view: parts[0] || "fleet", id: parts[1] ? decodeURIComponent(parts[1]) : null };
}

async function show() {
  if (!state.key) return;
  const r = route();
  const view = r.view === "unit" ? "unit" : (r.view === "alerts" || r.view === "alert") ? "alerts" : "fleet";
  for (const v of ["fleet", "unit", "alerts"]) $("#" + v + "-view").hidden = v !== view;
  $("#nav-fleet").toggleAttribute("aria-current", view !== "alerts");
  if (view !== "alerts") $("#nav-fleet").setAttribute("aria-current", "page");
  $("#nav-alerts").toggleAttribute("aria-current", view === "alerts");
  if (view === "alerts") $("#nav-alerts").setAttribute("aria-current", "page");
  try {
    if (view === "fleet") await showFleet();
    else if (view === "unit") await showUnit(r.id);
    else await showAlerts(r.view === "alert" ? r.id : null);
    say("Updated " + new Date().toLocaleTimeString());
  } catch (e) { say("Could not load: " + e.message, true); }
}

// ---- fleet view ------------------------------------------------------------------------
const COLUMNS = [
  ["unit", "Unit", (u) => (u.label || u.device_id).toLowerCase()],
  ["site", "Site", (u) => (u.site || "").toLowerCase()],
  ["state", "State", (u) => (u.online ? 0 : 2) + (u.in_range === false ? 1 : 0)],
  ["alerts", "Open alerts", (u) => 100 * (u.open_alerts.critical || 0) + 10 * (u.open_alerts.warning || 0) + (u.open_alerts.info || 0)],
  ["cabinet", "Cabinet", (u) => u.t_cabinet_c],
  ["wear", "Wear (R25 change)", (u) => u.figures["module.resistance_25c.change_pct"].value],
  ["days", "Days to wear limit", (u) => u.figures["module.days_to_wear_limit"].value],
  ["leak", "Heat leak (UA change)", (u) => u.figures["cabinet.ua.change_pct"].value],
  ["sink", "Hot-side sink change", (u) => u.figures["hot_side.resistance.change_pct"].value],
  ["cop", "COP now / best", (u) => u.figures["performance.cop"].value],
];

async function showFleet() {
  const fleet = await api("/v1/fleet");
  state.fleet = fleet;
  $("#fleet-count").textContent = fleet.counts.total + " units";
  const c = fleet.counts;
  const tile = (n, label, cls) => `<div class="tile ${cls}"><b>${n}</b>${label}</div>`;
  $("#tiles").innerHTML = tile(c.total, "units", "") + tile(c.online, "online", "ok") + tile(c.offline, "offline", c.offline ? "warn" : "") +
    tile(c.out_of_range, "out of range now", c.out_of_range ? "crit" : "") + tile(c.critical, "with critical alerts", c.critical ? "crit" : "") +
    tile(c.warning, "with warnings", c.warning ? "warn" : "") + tile(c.clear, "with no open alert", "ok") +
    `<div class="tile"><b>${spreadText(fleet.cop_spread)}</b>COP of the best possible (least · median · most)</div>`;
  const worstList = (name, title) => `<h2>${title}</h2><ol>${fleet.worst[name].map((w) =>
    `<li><a href="#/unit/${encodeURIComponent(w.device_id)}">${esc(w.label || w.device_id)}</a> ${figure(w)}</li>`).join("") || "<li>not enough data</li>"}</ol>`;
  $("#worst").innerHTML = worstList("wear", "Most wear (R25 change)") + worstList("leak", "Most heat leak (UA change)") + worstList("sink", "Hot-side sink most changed");
  const sites = [...new Set(fleet.units.map((u) => u.site).filter(Boolean))].sort();
  const sel = $("#site-filter"), chosen = sel.value;
  sel.innerHTML = '<option value="">every site</option>' + sites.map((s) => `<option${s === chosen ? " selected" : ""}>${esc(s)}</option>`).join("");
  drawFleetTable();
  drawFleetPlot(fleet.units);
}

function spreadText(s) {
  if (!s.units) return "—";
  return s.cop_of_best.map((x) => x === null ? "—" : Math.round(100 * x) + " %").join(" · ");
}

function drawFleetTable() {
  const fleet = state.fleet; if (!fleet) return;
  const [sortKey, dir] = state.sort;
  $("#devices thead tr").innerHTML = COLUMNS.map(([k, label]) => {
    const sorted = k === sortKey ? (dir > 0 ? "ascending" : "descending") : "none";
    return `<th scope="col" aria-sort="${sorted}"><button type="button" data-sort="${k}">${label}${k === sortKey ? (dir > 0 ? " ▲" : " ▼") : ""}</button></th>`;
  }).join("");
  const q = $("#search").value.trim().toLowerCase(), site = $("#site-filter").value, st = $("#state-filter").value;
  const keep = (u) => (!q || (u.label || "").toLowerCase().includes(q) || u.device_id.toLowerCase().includes(q)) &&
    (!site || u.site === site) &&
    (!st || (st === "online" && u.online) || (st === "offline" && !u.online) || (st === "out" && u.in_range === false) ||
      (st === "alerts" && Object.keys(u.open_alerts).length) || (st === "clear" && !Object.keys(u.open_alerts).length));
  const value = COLUMNS.find(([k]) => k === sortKey)[2];
  const units = fleet.units.filter(keep).sort((a, b) => {
    const va = value(a), vb = value(b);
    if (va === null || va === undefined) return 1;
    if (vb === null || vb === undefined) return -1;
    return (va < vb ? -1 : va > vb ? 1 : 0) * dir;
  });
  $("#shown").textContent = units.length + " of " + fleet.units.length + " units shown";
  $("#devices tbody").innerHTML = units.map((u) => {
    const f = u.figures, alerts = ["critical", "warning", "info"].filter((s) => u.open_alerts[s])
      .map((s) => `<span class="pill sev-${s}">${u.open_alerts[s]} ${s}</span>`).join("");
    const stateText = `<span class="pill ${u.online ? "state-on" : "state-off"}">${u.online ? "online" : "offline"}</span>` +
      (u.in_range === false ? '<span class="pill state-out">out of range</span>' : u.in_range ? '<span class="pill state-on">in range</span>' : "");
    return `<tr class="device" data-id="${esc(u.device_id)}">
      <td><a href="#/unit/${encodeURIComponent(u.device_id)}">${esc(u.label || u.device_id)}</a><div class="quiet-text">${esc(u.device_id)}</div></td>
      <td>${esc(u.site || "")}</td><td>${stateText}<div class="quiet-text">${ago(u.last_reading_at)}</div></td><td>${alerts || "none"}</td>
      <td class="num">${u.t_cabinet_c === null ? "—" : u.t_cabinet_c.toFixed(1) + " °C"}</td>
      <td class="num">${figure(f["module.resistance_25c.change_pct"])}</td><td class="num">${figure(f["module.days_to_wear_limit"])}</td>
      <td class="num">${figure(f["cabinet.ua.change_pct"])}</td><td class="num">${figure(f["hot_side.resistance.change_pct"])}</td>
      <td class="num">${f["performance.cop"].value === null ? figure(null) : figure(f["performance.cop"]) + " / " + figure(f["performance.cop_max"])}</td></tr>`;
  }).join("");
}

function plotWidth(el) { return Math.max(280, el.clientWidth || el.parentElement.clientWidth - 24); }

function place(id, opts, data) {
  const el = document.getElementById(id);
  if (state.plots[id]) state.plots[id].destroy();
  el.innerHTML = "";
  state.plots[id] = new uPlot({ width: plotWidth(el), height: 230, ...opts }, data, el);
}

function drawFleetPlot(units) {
  const pts = units.map((u) => [u.figures["module.resistance_25c.change_pct"].value, u.figures["cabinet.ua.change_pct"].value,
    u.figures["hot_side.resistance.change_pct"].value, u]).filter((p) => p[0] !== null).sort((a, b) => a[0] - b[0]);
  const dot = (stroke) => ({ stroke, paths: () => null, points: { show: true, size: 9, fill: stroke } });
  place("fleet-plot", {
    scales: { x: { time: false } },
    axes: [{ label: "R25 change since commissioning [%]" }, { label: "change [%]" }],
    series: [{ label: "R25 change [%]" }, { label: "UA change [%]", ...dot(COLOURS.cabinet) }, { label: "hot-side change [%]", ...dot(COLOURS.hot) }],
  }, [pts.map((p) => p[0]), pts.map((p) => p[1]), pts.map((p) => p[2])]);
  const far = (i) => pts.length ? pts.reduce((m, p) => (p[i] ?? -Infinity) > (m[i] ?? -Infinity) ? p : m) : null;
  const w = far(0), l = far(1), s = far(2);
  $("#fleet-plot-alt").textContent = pts.length ? `${pts.length} units plotted. Most wear: ${w[3].label || w[3].device_id} (${w[3].figures["module.resistance_25c.change_pct"].text}); ` +
    `most heat leak: ${l[3].label || l[3].device_id} (${l[3].figures["cabinet.ua.change_pct"].text}); most changed sink: ${s[3].label || s[3].device_id} (${s[3].figures["hot_side.resistance.change_pct"].text}).` : "No unit has been analysed yet.";
}

// ---- unit view -------------------------------------------------------------------------
async function showUnit(id) {
  const enc = encodeURIComponent(id);
  const span = RANGES[state.range], trendSpan = Math.max(span, TREND_MIN_MS);
  const keys = ["performance.cop", "performance.cop_max", "module.resistance_25c_ohm", "module.resistance_25c.baseline",
    "cabinet.ua_w_per_k", "cabinet.ua.baseline", "hot_side.resistance_k_per_w", "hot_side.resistance.baseline"];
  // All at once: the ranges end at the unit's newest reading, which the server knows.
  const [unit, readings, trends, alerts] = await Promise.all([
    api("/v1/fleet/units/" + enc),
    api(`/v1/devices/${enc}/readings/buckets?last=${span / 1000}&channels=t_cabinet,t_cold,t_hot,t_ambient,current,power`),
    api(`/v1/devices/${enc}/estimates?keys=${keys.join(",")}&last=${trendSpan / 1000}&every=${TREND_EVERY_S}`),
    api(`/v1/fleet/alerts?device=${enc}&limit=50`).then((page) => page.items),
  ]);
  const first = state.unit !== id;
  state.unit = id;
  $("#unit-title").textContent = (unit.label || id) + (unit.site ? " — " + unit.site : "");
  $("#unit-state").innerHTML = `<span class="pill ${unit.online ? "state-on" : "state-off"}">${unit.online ? "online" : "offline"}</span>` +
    (unit.in_range === false ? '<span class="pill state-out">out of range</span>' : "") +
    ` ${esc(id)} · cabinet ${unit.t_cabinet_c === null ? "—" : unit.t_cabinet_c.toFixed(1) + " °C"} · last reading ${ago(unit.last_reading_at)}`;
  document.querySelectorAll("[data-range]").forEach((b) => b.setAttribute("aria-pressed", String(b.dataset.range === state.range)));
  const end = Date.parse(readings.end);
  if (first) {
    $("#report-end").value = new Date(end).toISOString().slice(0, 10);
    $("#report-start").value = new Date(end - 7 * 86400e3).toISOString().slice(0, 10);
  }
  const start = Date.parse(readings.start), trendStart = Date.parse(trends.start);
  drawUnitPlots(unit, readings, trends, alerts, [start, end], [trendStart, end]);
  $("#registration").innerHTML = registration(unit);
  $("#capacity").textContent = unit.capacity;
  const rows = Object.entries(unit.all_figures).sort(([a], [b]) => a.localeCompare(b));
  $("#health-main tbody").innerHTML = MAIN_FIGURES.filter(([k]) => unit.all_figures[k]).map(([k, label]) =>
    `<tr><td>${label}</td><td class="num">${figure(unit.all_figures[k])}</td><td>${ago(unit.all_figures[k].at)}</td></tr>`).join("")
    || '<tr><td colspan="3" class="quiet-text">Not analysed yet.</td></tr>';
  $("#health tbody").innerHTML = rows.length ? rows.map(([k, f]) =>
    `<tr><td>${esc(k)}</td><td class="num">${figure(f)}</td><td>${f.at ? ago(f.at) : ""}</td></tr>`).join("")
    : '<tr><td colspan="3" class="quiet-text">Not analysed yet.</td></tr>';
  $("#unit-alerts").innerHTML = alerts.map(({ alert: a }) => `<li><span class="sev-${esc(a.severity)}">${esc(a.severity)}</span>
    <a href="#/alert/${a.id}">${esc(a.kind)}</a> · ${esc(a.state)} · ${esc(a.summary)} <span class="quiet-text">${ago(a.opened_at)}</span></li>`).join("") || "<li>No alerts.</li>";
}

function registration(u) {
  const m = u.module || {}, c = u.cabinet || {};
  const row = (k, v) => v === undefined || v === null ? "" : `<dt>${k}</dt><dd>${esc(v)}</dd>`;
  return row("Modules", m.count ? m.count + " × " + (m.couples ?? "?") + " couples" : null) + row("Rated current", m.i_max_a ? m.i_max_a + " A" : null) +
    row("Rated voltage", m.v_max_v ? m.v_max_v + " V" : null) + row("Rated ΔT", m.dt_max_k ? m.dt_max_k + " K" : null) +
    row("Rated heat pumped", m.q_max_w ? m.q_max_w + " W" : null) + row("Cabinet volume", c.volume_l ? c.volume_l + " L" : null) +
    row("Setpoint", c.setpoint_c !== undefined ? c.setpoint_c + " °C" : null) +
    row("Limits", u.band.low_c.toFixed(1) + " to " + u.band.high_c.toFixed(1) + " °C") + row("Limits from", u.band.source) + row("Alert profile", u.band.profile) +
    row("In service since", u.first_seen_at ? u.first_seen_at.slice(0, 10) : null);
}

function xs(items) { return items.map((b) => b.t_ms / 1000); }
function ch(items, name, part) { return items.map((b) => b.channels[name][part]); }

// uPlot hook drawing vertical marks (alerts) and a horizontal band of limits.
function marks(times, colour) {
  return { hooks: { draw: [(u) => {
    const ctx = u.ctx; ctx.save(); ctx.strokeStyle = colour; ctx.lineWidth = 2; ctx.setLineDash([4, 3]);
    for (const t of times) {
      const x = u.valToPos(t, "x", true);
      if (x < u.bbox.left || x > u.bbox.left + u.bbox.width) continue;
      ctx.beginPath(); ctx.moveTo(x, u.bbox.top); ctx.lineTo(x, u.bbox.top + u.bbox.height); ctx.stroke();
    }
    ctx.restore();
  }] } };
}

function drawUnitPlots(unit, readings, trends, alerts, span, trendSpan) {
  const it = readings.items, alertTimes = alerts.map(({ alert: a }) => Date.parse(a.opened_at) / 1000);
  const x = xs(it), flat = (v) => x.map(() => v);
  const line = (label, stroke, extra = {}) => ({ label, stroke, width: 1.5, spanGaps: false, ...extra });
  const scaleX = { x: { time: true, range: () => [span[0] / 1000, span[1] / 1000] } };
  place("plot-temp", {
    scales: scaleX, plugins: [marks(alertTimes, COLOURS.extra)],
    axes: [{}, { label: "°C" }],
    series: [{}, line("cabinet least [°C]", COLOURS.cabinet, { width: 1 }), line("cabinet greatest [°C]", COLOURS.cabinet, { width: 1 }),
      line("cabinet mean [°C]", COLOURS.cabinet, { width: 2 }),
      line("low limit [°C]", COLOURS.limit, { dash: [6, 4] }), line("high limit [°C]", COLOURS.limit, { dash: [6, 4] })],
    bands: [{ series: [2, 1], fill: "rgba(15,92,99,0.18)" }],
  }, [x, ch(it, "t_cabinet", "lo"), ch(it, "t_cabinet", "hi"), ch(it, "t_cabinet", "mean"), flat(unit.band.low_c), flat(unit.band.high_c)]);
  place("plot-faces", {
    scales: scaleX, axes: [{}, { label: "°C" }],
    series: [{}, line("cold side [°C]", COLOURS.cold), line("hot side [°C]", COLOURS.hot), line("ambient [°C]", COLOURS.ambient)],
  }, [x, ch(it, "t_cold", "mean"), ch(it, "t_hot", "mean"), ch(it, "t_ambient", "mean")]);
  $("#alt-faces").textContent = it.length ? `Mean cold-side, hot-side and ambient temperatures per interval of ${Math.round(readings.every_s / 60)} min.` : "No readings in this range.";
  const lo = Math.min(...ch(it, "t_cabinet", "lo").filter((v) => v !== null)), hi = Math.max(...ch(it, "t_cabinet", "hi").filter((v) => v !== null));
  $("#alt-temp").textContent = it.length ? `Cabinet from ${lo.toFixed(1)} to ${hi.toFixed(1)} °C over this ${state.range} (${it.length} intervals of ${Math.round(readings.every_s / 60)} min); limits ${unit.band.low_c.toFixed(1)} to ${unit.band.high_c.toFixed(1)} °C; ${alertTimes.length} alert(s) marked.`
    : "No readings in this range.";
  place("plot-power", {
    scales: { ...scaleX, W: {} }, axes: [{}, { label: "A" }, { scale: "W", side: 1, label: "W", grid: { show: false } }],
    series: [{}, line("current [A]", COLOURS.cold), line("power [W]", COLOURS.hot, { scale: "W" })],
  }, [x, ch(it, "current", "mean"), ch(it, "power", "mean")]);
  $("#alt-power").textContent = it.length ? `Mean current and electrical power per interval of ${Math.round(readings.every_s / 60)} min.` : "No readings in this range.";
  const s = trends.series;
  const kindTimes = (...kinds) => alerts.filter(({ alert: a }) => kinds.includes(a.kind)).map(({ alert: a }) => Date.parse(a.opened_at) / 1000);
  trendPlot("plot-cop", "alt-cop", trendSpan, [["performance.cop", "COP now", COLOURS.cabinet], ["performance.cop_max", "best possible COP", COLOURS.ambient]], s, "COP [-]", null, kindTimes("capacity_shortfall"));
  const wear = unit.wear_limit_ohm, crossing = unit.wear_limit_at ? Date.parse(unit.wear_limit_at) : null;
  trendPlot("plot-r25", "alt-r25", trendSpan, [["module.resistance_25c_ohm", "R25", COLOURS.hot], ["module.resistance_25c.baseline", "baseline", COLOURS.base]], s, "Ω",
    wear === null ? null : { value: wear, label: "wear limit", crossing, from: unit.figures["module.resistance_25c_ohm"] }, kindTimes("module_wear"));
  trendPlot("plot-ua", "alt-ua", trendSpan, [["cabinet.ua_w_per_k", "UA", COLOURS.cabinet], ["cabinet.ua.baseline", "baseline", COLOURS.base]], s, "W/K", null, kindTimes("heat_leak"));
  trendPlot("plot-hot", "alt-hot", trendSpan, [["hot_side.resistance_k_per_w", "hot-side resistance", COLOURS.hot], ["hot_side.resistance.baseline", "baseline", COLOURS.base]], s, "K/W", null, kindTimes("hot_side_cooling", "over_temperature"));
}

// A health trend: bucket means of each key on one time axis, and optionally a limit with the
// straight projection from the newest value to its crossing.
function trendPlot(id, altId, span, keys, series, unitLabel, limit, alertTimes = []) {
  const times = new Set();
  for (const [k] of keys) for (const p of series[k] || []) times.add(p.t_ms / 1000);
  let end = span[1] / 1000;
  const proj = limit && limit.crossing && limit.from && limit.from.value !== null ? limit : null;
  if (proj) { end = Math.max(end, proj.crossing / 1000); times.add(Date.parse(proj.from.at) / 1000); times.add(proj.crossing / 1000); }
  const x = [...times].sort((a, b) => a - b);
  const data = [x];
  for (const [k] of keys) { const m = new Map((series[k] || []).map((p) => [p.t_ms / 1000, p.mean])); data.push(x.map((t) => m.has(t) ? m.get(t) : null)); }
  const ser = [{}, ...keys.map(([, label, stroke], i) => ({ label: `${label} [${unitLabel}]`, stroke, width: i ? 1.5 : 2, dash: i ? [5, 4] : undefined, spanGaps: true,
    points: { show: i === 0, size: 4 } }))];
  if (limit) { data.push(x.map(() => limit.value)); ser.push({ label: `${limit.label} [${unitLabel}]`, stroke: COLOURS.limit, dash: [8, 4], width: 1.5 }); }
  if (proj) {
    const a = Date.parse(proj.from.at) / 1000, b = proj.crossing / 1000;
    data.push(x.map((t) => t === a ? proj.from.value : t === b ? proj.value : null));
    ser.push({ label: "projected trend", stroke: COLOURS.extra, dash: [2, 3], width: 2, spanGaps: true });
  }
  place(id, { scales: { x: { time: true, range: () => [span[0] / 1000, end] } }, axes: [{}, { label: unitLabel }], series: ser,
    plugins: [marks(alertTimes, COLOURS.extra)] }, data);
  const main = (series[keys[0][0]] || []);
  let alt = main.length ? `${main.length} points; newest ${main[main.length - 1].mean.toPrecision(3)} ${unitLabel}` : "Not enough data for this trend yet.";
  if (main.length && main.some((p) => p.reliable_n < p.n)) alt += "; some values are not yet reliable";
  if (limit) alt += `; ${limit.label} ${limit.value.toPrecision(3)} ${unitLabel}` + (proj ? `, projected crossing ${new Date(proj.crossing).toISOString().slice(0, 10)}` : ", no crossing projected");
  $("#" + altId).textContent = alt + ".";
}

// ---- alerts view -----------------------------------------------------------------------
async function showAlerts(targetId) {
  if (document.activeElement && document.activeElement.matches("#alerts textarea, #alerts input")) return;
  const [open, recent] = (await Promise.all([api("/v1/fleet/alerts?state=open&limit=200"), api("/v1/fleet/alerts?limit=100")]))
    .map((page) => page.items);
  const seen = new Set(open.map(({ alert }) => alert.id));
  const list = open.concat(recent.filter(({ alert }) => !seen.has(alert.id)));
  $("#alerts tbody").innerHTML = list.map(({ alert: a, evidence_text: ev }) => `<tr id="alert-${a.id}"${String(a.id) === String(targetId) ? ' class="target"' : ""}>
    <td class="sev-${esc(a.severity)}">${esc(a.severity)}</td>
    <td><a href="#/unit/${encodeURIComponent(a.device_id)}">${esc(a.device_id)}</a></td>
    <td><a href="#/alert/${a.id}">${esc(a.kind)}</a>: ${esc(a.summary)}<div class="quiet-text">opened ${ago(a.opened_at)}</div>
      <details${String(a.id) === String(targetId) ? " open" : ""} data-trail="${a.id}"><summary>Evidence and audit trail</summary>
      <dl class="evidence">${ev.map((l) => `<dt>${esc(l.name)}</dt><dd>${esc(l.text)}</dd>`).join("")}</dl><ul class="plain trail"></ul></details></td>
    <td>${esc(a.state)}</td>
    <td>${a.state === "open" ? `<form class="ack" data-ack-form="${a.id}"><label class="sr" for="note-${a.id}">Note</label>
      <textarea id="note-${a.id}" rows="2" placeholder="note (what was checked, what was done)"></textarea>
      <button type="submit" data-ack="${a.id}">Acknowledge</button></form>` : ""}</td></tr>`).join("");
  $("#alerts-note").textContent = open.length ? "" : "No open alerts.";
  document.querySelectorAll("form[data-ack-form]").forEach((f) => f.addEventListener("submit", async (ev) => {
    ev.preventDefault();
    const id = f.dataset.ackForm, note = f.querySelector("textarea").value.trim();
    try {
      await api("/v1/alerts/" + id + "/ack", { method: "POST", headers: { "Content-Type": "application/json" }, body: JSON.stringify(note ? { note } : {}) });
      say("Alert " + id + " acknowledged.");
      await showAlerts(id);
    } catch (e) { say("Could not acknowledge: " + e.message, true); }
  }));
  document.querySelectorAll("details[data-trail]").forEach((d) => {
    const load = () => loadTrail(d);
    d.addEventListener("toggle", load);
    if (d.open) load();
  });
  if (targetId) { const row = document.getElementById("alert-" + targetId); if (row) row.scrollIntoView({ block: "center" }); }
}

async function loadTrail(d) {
  if (!d.open) return;
  const detail = await api("/v1/alerts/" + d.dataset.trail);
  d.querySelector(".trail").innerHTML = detail.history.map((h) => `<li>${esc(h.at)}: ${esc(h.from_state || "new")} → ${esc(h.to_state)} (${esc(h.severity)}) by ${esc(h.actor)}${h.note ? ": “" + esc(h.note) + "”" : ""}</li>`).join("");
}

// ---- report ----------------------------------------------------------------------------
async function downloadReport(ev) {
  ev.preventDefault();
  const id = state.unit, start = $("#report-start").value, end = $("#report-end").value;
  say("Writing the report…");
  try {
    const r = await api(`/v1/reports/cold-chain.pdf?device=${encodeURIComponent(id)}&start=${start}&end=${end}`, { raw: true });
    const url = URL.createObjectURL(await r.blob());
    const a = document.createElement("a"); a.href = url; a.download = `cold-chain-${id}-${start}-${end}.pdf`;
    document.body.appendChild(a); a.click(); a.remove(); setTimeout(() => URL.revokeObjectURL(url), 10000);
    say("Report written.");
  } catch (e) { say("Could not write the report: " + e.message, true); }
}

// ---- wiring ----------------------------------------------------------------------------
$("#key-form").addEventListener("submit", (ev) => {
  ev.preventDefault();
  state.key = $("#key").value.trim();
  localStorage.setItem("tecfleet.key", state.key);
  show();
});
$("#devices thead").addEventListener("click", (ev) => {
  const b = ev.target.closest("button[data-sort]"); if (!b) return;
  state.sort = [b.dataset.sort, state.sort[0] === b.dataset.sort ? -state.sort[1] : 1];
  drawFleetTable();
  document.querySelector(`button[data-sort="${b.dataset.sort}"]`).focus();
});
for (const id of ["#search", "#site-filter", "#state-filter"]) $(id).addEventListener("input", drawFleetTable);
$("#ranges").addEventListener("click", (ev) => {
  const b = ev.target.closest("[data-range]");
  if (b) location.hash = `#/unit/${encodeURIComponent(state.unit)}/${b.dataset.range}`;
});
$("#report-form").addEventListener("submit", downloadReport);
window.addEventListener("hashchange", () => { show(); $("#view").focus(); });
// Each plot is named by its text alternative, for screen readers.
document.querySelectorAll(".plot").forEach((el) => el.setAttribute("aria-labelledby", el.nextElementSibling.id));
if (state.key) { $("#key").value = state.key; show(); }
setInterval(() => { if (!document.hidden) show(); }, POLL_MS);

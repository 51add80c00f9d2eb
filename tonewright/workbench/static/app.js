"use strict";
// The workbench page: three views over the JSON API of tonewright.workbench.app.

const $ = (id) => document.getElementById(id);
const esc = (s) => String(s ?? "").replace(/[&<>"']/g, (c) => (
  { "&": "&amp;", "<": "&lt;", ">": "&gt;", '"': "&quot;", "'": "&#39;" }[c]));
const fmt = (v, d = 1) => (v === null || v === undefined || Number.isNaN(v) ? "–" : Number(v).toFixed(d));

async function api(method, url, body, raw) {
  const opts = { method, headers: {} };
  if (raw !== undefined) { opts.body = raw; opts.headers["Content-Type"] = "application/octet-stream"; }
  else if (body !== undefined) { opts.body = JSON.stringify(body); opts.headers["Content-Type"] = "application/json"; }
  const res = await fetch(url, opts);
  const data = await res.json().catch(() => ({ error: `the server answered ${res.status}` }));
  if (!res.ok) {
    let msg = data.error;
    if (!msg && Array.isArray(data.detail)) msg = data.detail.map((d) => `${d.loc.slice(1).join(".")}: ${d.msg}`).join("; ");
    throw new Error(msg || `the server answered ${res.status}`);
  }
  return data;
}

function follow(jobId, onEvent) {
  return new Promise((resolve, reject) => {
    const source = new EventSource(`/api/jobs/${jobId}/events`);
    source.onmessage = (m) => {
      const event = JSON.parse(m.data);
      onEvent(event);
      if (event.type === "done") { source.close(); resolve(event.result); }
      if (event.type === "error") { source.close(); reject(new Error(event.error)); }
    };
    source.onerror = () => { /* the browser reconnects by itself */ };
  });
}

// -- pages ---------------------------------------------------------------------------------
document.querySelectorAll("nav .tab").forEach((b) => b.addEventListener("click", () => {
  document.querySelectorAll("nav .tab").forEach((t) => t.classList.toggle("active", t === b));
  document.querySelectorAll(".page").forEach((p) => { p.hidden = p.id !== `page-${b.dataset.page}`; });
}));

let workshop = { files: [] };
async function loadWorkshop() {
  workshop = await api("GET", "/api/workshop");
  $("folder").textContent = `workshop: ${workshop.folder}`;
  const fill = (sel, kinds) => {
    const keep = sel.value;
    sel.innerHTML = workshop.files.filter((f) => kinds.includes(f.kind))
      .map((f) => `<option>${esc(f.name)}</option>`).join("");
    if ([...sel.options].some((o) => o.value === keep)) sel.value = keep;
  };
  fill($("bar-file"), ["bar", "tube", "string", "unreadable", "other"]);
  fill($("inst-file"), ["instrument"]);
  const bench = $("bench-bar"), keep = bench.value;
  bench.innerHTML = workshop.bench_bars.map((n) => `<option>${esc(n)}</option>`).join("");
  if ([...bench.options].some((o) => o.value === keep)) bench.value = keep;
}

// -- a bar ---------------------------------------------------------------------------------
const barName = () => $("bar-name").value.trim() || $("bar-file").value;

async function openBar() {
  $("bar-error").textContent = ""; $("bar-modes-out").innerHTML = "";
  if (!$("bar-file").value) return;
  const part = await api("GET", `/api/part?name=${encodeURIComponent($("bar-file").value)}`);
  $("bar-text").value = part.text;
  $("bar-error").textContent = part.error || "";
  showSummary(part.summary);
  showDesign((await api("GET", `/api/design?name=${encodeURIComponent(part.name)}`)).design);
}

function showSummary(s) {
  if (!s) { $("bar-summary").textContent = ""; return; }
  const dims = s.kind === "bar" ? `, ${fmt(s.width_mm)} mm wide, ${fmt(s.thickness_mm)} mm thick` : "";
  $("bar-summary").textContent = `${s.title || ""} ${s.kind}, ${fmt(s.length_mm)} mm long${dims}` +
    (s.has_target ? "" : " (no [target] table: nothing to design to)");
}

$("bar-file").addEventListener("change", () => { $("bar-name").value = ""; openBar().catch(showBarError); });
const showBarError = (e) => { $("bar-error").textContent = e.message; };

$("bar-check").addEventListener("click", async () => {
  $("bar-error").textContent = "";
  try { showSummary((await api("POST", "/api/part/check", { text: $("bar-text").value, name: barName() || "part.toml" })).summary); $("bar-error").textContent = ""; }
  catch (e) { showBarError(e); }
});
$("bar-save").addEventListener("click", async () => {
  $("bar-error").textContent = "";
  try {
    const saved = await api("PUT", "/api/part", { name: barName(), text: $("bar-text").value, replace: $("bar-replace").checked });
    showSummary(saved.summary); await loadWorkshop(); $("bar-file").value = saved.name; $("bar-name").value = "";
  } catch (e) { showBarError(e); }
});

function shapesSvg(all) {
  const modes = all.filter((m) => m.shape);
  const w = 640, h = 46, pad = 4;
  const rows = modes.map((m, i) => {
    const xs = m.shape.x_mm, ys = m.shape.y, L = xs[xs.length - 1] || 1;
    const pts = xs.map((x, k) => `${(pad + (w - 2 * pad) * x / L).toFixed(1)},${(i * h + h / 2 - ys[k] * (h / 2 - 6)).toFixed(1)}`).join(" ");
    return `<line x1="${pad}" x2="${w - pad}" y1="${i * h + h / 2}" y2="${i * h + h / 2}" stroke="#ccc"/>` +
      `<polyline fill="none" stroke="#8a5a2b" stroke-width="1.6" points="${pts}"/>` +
      `<text x="${w - pad}" y="${i * h + 14}" text-anchor="end" font-size="11">${esc(m.family)} ${m.order}: ${fmt(m.frequency_hz, 1)} Hz</text>`;
  }).join("");
  return `<svg class="shapes" viewBox="0 0 ${w} ${modes.length * h}" width="${w}">${rows}</svg>`;
}

$("bar-modes").addEventListener("click", async () => {
  $("bar-error").textContent = ""; $("bar-modes-out").innerHTML = "solving …";
  try {
    const m = await api("GET", `/api/modes?name=${encodeURIComponent($("bar-file").value)}&count=3`);
    const rows = m.modes.map((d) => `<tr><td>${esc(d.family)} ${d.order}</td><td>${fmt(d.frequency_hz, 2)}</td><td>${fmt(d.ratio, 3)}</td><td>${esc(d.note)} ${d.cents >= 0 ? "+" : ""}${fmt(d.cents, 1)}</td></tr>`).join("");
    $("bar-modes-out").innerHTML = `<p class="muted">model: ${esc(m.model || "")}; shapes drawn from the beam model</p><table id="modes-table"><tr><th>mode</th><th>Hz</th><th>ratio</th><th>note, cents (A4 = 440 Hz)</th></tr>${rows}</table>${shapesSvg(m.modes)}`;
  } catch (e) { $("bar-modes-out").innerHTML = ""; showBarError(e); }
});

function showDesign(d) {
  $("design-summary").textContent = ""; $("design-figures").innerHTML = ""; $("design-files").innerHTML = "";
  if (!d) { $("design-status").textContent = "not designed yet"; return; }
  $("design-status").innerHTML = d.converged
    ? `<span class="met">meets the target</span>, certified by ${esc(d.certified_by)}`
    : `<span class="missed">misses the target</span>: ${esc(d.message)}`;
  if (d.partials) {
    $("design-summary").textContent = d.partials.map((p) =>
      `${p.family} ${p.order}: target ${fmt(p.target_hz, 2)} Hz, got ${fmt(p.achieved_hz, 2)} Hz, ${p.error_cents >= 0 ? "+" : ""}${fmt(p.error_cents, 2)} cents (±${p.tolerance_cents})`).join("\n");
  }
  const pngs = (d.files || []).filter((f) => f.endsWith(".png"));
  $("design-figures").innerHTML = pngs.map((f) => `<img alt="${esc(f)}" src="/api/file?path=${encodeURIComponent(f)}">`).join("");
  listFiles(d.files || []);
}
function listFiles(files) {
  $("design-files").innerHTML = files.map((f) => `<li><a href="/api/file?path=${encodeURIComponent(f)}" download>${esc(f)}</a></li>`).join("");
}

$("design-run").addEventListener("click", async () => {
  $("design-error").textContent = ""; $("design-run").disabled = true;
  const bar = $("design-progress"); bar.hidden = false; bar.value = 0;
  try {
    const { job } = await api("POST", "/api/design", { name: $("bar-file").value, fidelity: $("design-fidelity").value || null, replace: $("design-replace").checked });
    const result = await follow(job, (e) => {
      if (e.type === "progress") { bar.max = e.budget; bar.value = Math.min(e.solves, e.budget); $("design-status").textContent = `${e.stage}: ${e.solves} solves, worst partial ${fmt(e.worst_cents, 2)} cents`; }
      else $("design-status").textContent = e.type;
    });
    showDesign(result);
  } catch (e) { $("design-error").textContent = e.message; }
  finally { $("design-run").disabled = false; bar.hidden = true; }
});

$("shop-run").addEventListener("click", async () => {
  $("design-error").textContent = "";
  try { const r = await api("POST", "/api/shop", { name: $("bar-file").value, accept_missed_design: $("shop-accept").checked, replace: true }); listFiles(r.files); }
  catch (e) { $("design-error").textContent = e.message; }
});

// -- the instrument ------------------------------------------------------------------------
async function openInstrument() {
  $("inst-error").textContent = ""; $("inst-table").innerHTML = ""; $("inst-figures").innerHTML = "";
  if (!$("inst-file").value) { $("inst-status").textContent = "no instrument file in this folder"; return; }
  const inst = await api("GET", `/api/instrument?name=${encodeURIComponent($("inst-file").value)}`);
  const rows = inst.bars.map((b) => {
    const s = b.summary || {};
    const bench = b.bench.taps || b.bench.cuts ? `${b.bench.taps} taps, ${b.bench.cuts} cuts` : "";
    const cents = [1, 2, 3, 4].filter((k) => s[`p${k}_partial`]).map((k) => `${esc(s[`p${k}_partial`])} ${esc(s[`p${k}_error_cents`])}`).join(", ");
    return `<tr><td>${esc(b.note)}</td><td>${fmt(b.length_mm)}</td><td>${fmt(b.width_mm)}</td><td>${fmt(b.thickness_mm)}</td><td>${cents}</td>` +
      `<td class="${esc(b.design_status)}">${esc(b.status)}</td><td>${esc(s.message || "")}</td><td>${esc(bench)}</td><td class="muted">${esc(b.blank_reason || "")}</td></tr>`;
  }).join("");
  $("inst-table").innerHTML = `<tr><th>note</th><th>length mm</th><th>width mm</th><th>thickness mm</th><th>error, cents</th><th>status</th><th>binding limit / message</th><th>at the bench</th><th>why this blank</th></tr>${rows}`;
  $("inst-figures").innerHTML = inst.figures.map((f) => `<img alt="${esc(f)}" src="/api/file?path=${encodeURIComponent(f)}&t=${Date.now()}">`).join("");
  $("inst-status").textContent = `${inst.title}: ${inst.bars.length} bars`;
}
$("inst-file").addEventListener("change", () => openInstrument().catch((e) => { $("inst-error").textContent = e.message; }));
$("tab-instrument").addEventListener("click", () => openInstrument().catch((e) => { $("inst-error").textContent = e.message; }));
$("inst-run").addEventListener("click", async () => {
  $("inst-error").textContent = ""; $("inst-run").disabled = true;
  const bar = $("inst-progress"); bar.hidden = false; bar.value = 0;
  try {
    const started = await api("POST", "/api/instrument/run", { name: $("inst-file").value, fidelity: $("inst-fidelity").value || null });
    bar.max = Math.max(started.to_design, 1);
    $("inst-status").textContent = `${started.to_design} bars to design, ${started.reused} kept from the last run`;
    const r = await follow(started.job, (e) => { if (e.type === "progress") { bar.value = e.finished; $("inst-status").textContent = `${e.bar} done (${e.finished} of ${e.total})`; } });
    await openInstrument();
    $("inst-status").textContent = `${r.met} of ${r.bars} bars meet their targets`;
  } catch (e) { $("inst-error").textContent = e.message; }
  finally { $("inst-run").disabled = false; bar.hidden = true; }
});

// -- the bench -----------------------------------------------------------------------------
function wavBytes(samples, rate) {
  const buf = new ArrayBuffer(44 + 2 * samples.length), v = new DataView(buf);
  const str = (o, s) => [...s].forEach((c, i) => v.setUint8(o + i, c.charCodeAt(0)));
  str(0, "RIFF"); v.setUint32(4, 36 + 2 * samples.length, true); str(8, "WAVE"); str(12, "fmt ");
  v.setUint32(16, 16, true); v.setUint16(20, 1, true); v.setUint16(22, 1, true); v.setUint32(24, rate, true);
  v.setUint32(28, 2 * rate, true); v.setUint16(32, 2, true); v.setUint16(34, 16, true); str(36, "data");
  v.setUint32(40, 2 * samples.length, true);
  samples.forEach((s, i) => v.setInt16(44 + 2 * i, Math.max(-1, Math.min(1, s)) * 32767, true));
  return buf;
}

async function record(seconds) {
  // no echo cancelling, noise suppression or gain riding: they eat the decaying partials
  const stream = await navigator.mediaDevices.getUserMedia({ audio: { echoCancellation: false, noiseSuppression: false, autoGainControl: false } });
  const ctx = new AudioContext();
  const src = ctx.createMediaStreamSource(stream);
  const proc = ctx.createScriptProcessor(4096, 1, 1);
  const chunks = [];
  proc.onaudioprocess = (e) => chunks.push(new Float32Array(e.inputBuffer.getChannelData(0)));
  src.connect(proc); proc.connect(ctx.destination);
  await new Promise((r) => setTimeout(r, seconds * 1000));
  proc.disconnect(); src.disconnect(); stream.getTracks().forEach((t) => t.stop());
  const rate = ctx.sampleRate; await ctx.close();
  const all = new Float32Array(chunks.reduce((n, c) => n + c.length, 0));
  let k = 0; chunks.forEach((c) => { all.set(c, k); k += c.length; });
  return wavBytes(all, rate);
}

async function sendTap(bytes) {
  $("bench-error").textContent = ""; $("bench-status").textContent = "listening to the tap …";
  const t0 = performance.now();
  try {
    const r = await api("POST", `/api/bench/tap?bar=${encodeURIComponent($("bench-bar").value)}`, undefined, bytes);
    showTap(r);
    $("bench-status").textContent = `analysed in ${((performance.now() - t0) / 1000).toFixed(2)} s`;
    await showHistory();
  } catch (e) { $("bench-error").textContent = e.message; $("bench-status").textContent = ""; }
}

const PALETTE = ["#1b6f8a", "#c0392b", "#7b4fa0", "#5a8f29", "#b5651d"];

function lineChart(series, xLabel, yLabel, xs) {
  // series: [{name, values}] over the common xs; a zero line; the legend names each colour
  const w = 520, h = 200, l = 48, r = 10, t = 10, b = 34;
  const all = series.flatMap((s) => s.values).concat([0]);
  let lo = Math.min(...all), hi = Math.max(...all); if (hi - lo < 1e-9) { hi += 1; lo -= 1; }
  const x0 = Math.min(...xs), x1 = Math.max(...xs) === x0 ? x0 + 1 : Math.max(...xs);
  const X = (x) => l + (w - l - r) * (x - x0) / (x1 - x0), Y = (y) => t + (h - t - b) * (hi - y) / (hi - lo);
  const lines = series.map((s, i) => `<polyline fill="none" stroke="${PALETTE[i % 5]}" stroke-width="2" points="${s.values.map((v, k) => `${X(xs[k]).toFixed(1)},${Y(v).toFixed(1)}`).join(" ")}"/>` +
    `<text x="${l + 6 + 110 * i}" y="${h - 4}" font-size="11" fill="${PALETTE[i % 5]}">${esc(s.name)}</text>`).join("");
  return `<svg class="shapes" viewBox="0 0 ${w} ${h}" width="${w}"><line x1="${l}" x2="${w - r}" y1="${Y(0)}" y2="${Y(0)}" stroke="#999" stroke-dasharray="3 3"/>` +
    `<text x="4" y="${t + 10}" font-size="10">${esc(yLabel)}</text><text x="${w - r}" y="${h - 18}" font-size="10" text-anchor="end">${esc(xLabel)}</text>` +
    `<text x="${l - 4}" y="${Y(hi) + 4}" font-size="10" text-anchor="end">${fmt(hi, 1)}</text><text x="${l - 4}" y="${Y(lo) + 4}" font-size="10" text-anchor="end">${fmt(lo, 1)}</text>${lines}</svg>`;
}

let lastStep = null;
function showTap(r) {
  const t = r.tap;
  $("bench-partials").innerHTML = `<tr><th>Hz</th><th>level dB</th><th>what it is</th></tr>` +
    t.partials.map((p) => `<tr class="${p.from_bar ? "" : "muted"}"><td>${fmt(p.frequency_hz, 2)}</td><td>${fmt(p.level_db, 1)}</td><td>${esc(p.label || "")}${p.method === "peak" ? " (spectral peak)" : ""}</td></tr>`).join("") +
    (t.strike_hz ? `<tr><td colspan="3">strike note ${fmt(t.strike_hz, 2)} Hz</td></tr>` : "");
  const a = r.advice;
  $("bench-caution").textContent = (a && a.caution) || r.caution;
  if (!a) { $("bench-target").innerHTML = ""; $("bench-cut").innerHTML = "<p>No [target] table in this part file: nothing to tune to.</p>"; lastStep = null; return; }
  $("bench-target").innerHTML = `<tr><th>partial</th><th>target Hz</th><th>now Hz</th><th>cents</th></tr>` +
    a.partials.map((p) => `<tr><td>${esc(p.partial)}</td><td>${fmt(p.target_hz, 2)}</td><td>${fmt(p.now_hz, 2)}</td><td class="${Math.abs(p.now_cents) <= p.tolerance_cents ? "met" : "missed"}">${p.now_cents >= 0 ? "+" : ""}${fmt(p.now_cents, 1)}</td></tr>`).join("");
  const step = a.steps && a.steps[0];
  lastStep = step || null;
  if (!step) { $("bench-cut").innerHTML = `<p>${esc(a.message)}</p>`; return; }
  const predicted = (step.predicted || []).map((p) => `${esc(p.partial)} ${fmt(p.hz, 1)} Hz (${p.cents >= 0 ? "+" : ""}${fmt(p.cents, 1)})`).join(", ");
  const tm = a.tuning_map;
  const mapSvg = tm && tm.positions_mm.length > 1
    ? `<h2>Tuning map</h2><p class="muted">cents each partial moves for 0.1 mm taken at a place (a ${fmt(tm.tool_width_mm, 0)} mm tool)</p>` +
      lineChart(Object.entries(tm.cents_per_0_1_mm).map(([name, values]) => ({ name, values })), "position along the bar, mm", "cents / 0.1 mm", tm.positions_mm)
    : "";
  $("bench-cut").innerHTML = `<p id="next-cut">At ${esc((step.positions_mm || []).join(" and "))} mm, ${fmt(step.depth_mm, 2)} mm deep over ${fmt(step.length_mm, 0)} mm (a ${fmt(step.tool_width_mm, 0)} mm tool).</p>` +
    `<p class="muted">Predicted after it: ${predicted}</p><p class="muted">${esc(a.message)}</p>` +
    `<button id="bench-cut-done">I made this cut</button><div id="bench-map">${mapSvg}</div>`;
  $("bench-cut-done").addEventListener("click", async () => {
    await api("POST", "/api/bench/cut", { bar: $("bench-bar").value, description: `cut at ${(step.positions_mm || []).join(" & ")} mm, ${step.depth_mm} mm deep`, windows_mm: step.windows_mm, depth_mm: step.depth_mm, tool_width_mm: step.tool_width_mm, eased_edge_mm: step.eased_edge_mm });
    await showHistory();
  });
}

async function showHistory() {
  if (!$("bench-bar").value) return;
  const h = await api("GET", `/api/bench/history?bar=${encodeURIComponent($("bench-bar").value)}`);
  const taps = h.entries.filter((e) => e.kind === "tap" && e.data.advice);
  if (taps.length > 1) {
    const names = taps[0].data.advice.partials.map((p) => p.partial);
    const series = names.map((name, i) => ({ name, values: taps.map((e) => (e.data.advice.partials[i] || {}).now_cents ?? 0) }));
    $("bench-way").innerHTML = lineChart(series, "tap", "cents from target", taps.map((_, i) => i + 1));
  } else $("bench-way").innerHTML = "";
  $("bench-history").innerHTML = h.entries.map((e) => {
    const when = new Date(e.at * 1000).toLocaleString();
    if (e.kind === "cut") return `<li>${esc(when)}: ${esc(e.data.description)}</li>`;
    const a = e.data.advice;
    const cents = a ? a.partials.map((p) => `${esc(p.partial)} ${p.now_cents >= 0 ? "+" : ""}${fmt(p.now_cents, 1)}`).join(", ") : `${e.data.tap.partials.length} partials`;
    return `<li>${esc(when)}: tap, ${cents}</li>`;
  }).join("");
}

$("bench-bar").addEventListener("change", () => showHistory().catch(() => {}));
$("tab-bench").addEventListener("click", () => showHistory().catch(() => {}));
$("bench-record").addEventListener("click", async () => {
  $("bench-error").textContent = ""; $("bench-record").disabled = true;
  $("bench-status").textContent = "recording: strike the bar now";
  try { await sendTap(await record(Number($("bench-seconds").value) || 3)); }
  catch (e) { $("bench-error").textContent = `microphone: ${e.message}`; }
  finally { $("bench-record").disabled = false; }
});
$("bench-file").addEventListener("change", async () => {
  const f = $("bench-file").files[0]; if (f) await sendTap(await f.arrayBuffer());
});

loadWorkshop().then(openBar).catch((e) => { $("bar-error").textContent = e.message; });

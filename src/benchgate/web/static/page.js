// benchgate operator page. Everything from the station is put on the page as text
// (textContent), never as HTML.
"use strict";

(function () {
  const $ = (id) => document.getElementById(id);
  const CSRF = document.querySelector('meta[name="benchgate-csrf"]').content;
  const TAG = document.querySelector('meta[name="benchgate-tag"]').content;
  const WORDS = { pass: "PASS", fail: "FAIL", inconclusive: "UNDECIDED", error: "ERROR", aborted: "ABORTED" };
  const MARKS = { pass: "✓", fail: "✗", inconclusive: "?", error: "!", aborted: "■" };
  const SUPPLY = { off: "OFF", on: "ON", unknown: "?", run: "RUN", stopping: "…", none: "—" };
  const ACTIVE = ["starting", "preflight", "running"];
  let state = null;
  let wave = null;
  let sending = false;

  function text(el, value) { el.textContent = value == null ? "" : String(value); }
  function show(el, yes) { el.hidden = !yes; }
  function el(tag, cls, value) {
    const e = document.createElement(tag);
    if (cls) e.className = cls;
    if (value != null) e.textContent = String(value);
    return e;
  }
  function active() { return state && ACTIVE.includes(state.phase); }
  function controlling() { return !active() || !state.controller || state.controller === TAG; }
  function note(message) { text($("notice"), message); show($("notice"), !!message); }

  async function post(action, body) {
    try {
      const r = await fetch("/api/" + action, {
        method: "POST", credentials: "same-origin",
        headers: { "Content-Type": "application/json", "X-Benchgate-Csrf": CSRF },
        body: JSON.stringify(body || {}),
      });
      let data = {};
      try { data = await r.json(); } catch (e) { data = { message: r.status + " " + r.statusText }; }
      if (!r.ok) note(data.message || ("refused (" + r.status + ")"));
      return r.ok;
    } catch (e) {
      note("the station did not answer: " + e);
      return false;
    }
  }

  // ---------------------------------------------------------------- actions
  function stop() { post("stop"); }
  function answer(value) {
    if (!state || !state.ask || !controlling()) return;
    const id = state.ask.id;
    post("answer", { ask: id, answer: value });
  }
  function retest() { if (canRetest()) post("retest"); }
  function canRetest() { return state && state.phase === "finished" && !!state.serial; }
  function expectingUnit() {
    return state && !state.blocked && !state.closing && (state.phase === "idle" || state.phase === "finished");
  }

  $("stop").addEventListener("click", stop);
  $("retest").addEventListener("click", retest);
  $("new-session").addEventListener("click", () => post("session"));
  $("plan-select").addEventListener("change", (e) => post("plan", { name: e.target.value }));
  document.querySelectorAll(".ask-buttons button").forEach((b) => {
    b.addEventListener("click", () => answer(b.dataset.answer));
  });
  $("scan-form").addEventListener("submit", async (e) => {
    e.preventDefault();
    const input = $("serial");
    const serial = input.value.trim();
    if (!serial || sending) return;
    sending = true;
    input.disabled = true;
    const ok = await post("scan", { serial: serial });
    sending = false;
    input.disabled = false;
    if (ok) { input.value = ""; note(""); }
    focusSerial();
  });

  // A barcode scanner types a whole serial in a burst and ends it with Enter: a letter answers
  // only if no other key follows within BURST_MS, and Enter only if no key came just before it,
  // so a scan that arrives while a hazard or a prompt is shown answers nothing. Esc acts at once.
  const BURST_MS = 120;
  let lastKey = 0;
  let pending = null;
  document.addEventListener("keydown", (e) => {
    const now = performance.now();
    const burst = now - lastKey < BURST_MS;
    lastKey = now;
    if (pending !== null) { clearTimeout(pending); pending = null; }
    if (e.key === "Escape") { e.preventDefault(); stop(); return; }
    if (e.key === "F2") { e.preventDefault(); if (!burst) retest(); return; }
    const a = state && state.ask;
    if (!a || !controlling()) return;
    const target = e.target || {};
    if (e.key === "Enter" && target.tagName === "BUTTON") return; // the button's own click answers
    const k = e.key.toLowerCase();
    const map = {
      hazard: { a: "acknowledge", d: "decline" },
      yesno: { y: "y", n: "n" },
      done: { enter: "" },
      retry: { enter: "", r: "", n: "n" },
    }[a.kind] || {};
    if (Object.prototype.hasOwnProperty.call(map, k)) {
      e.preventDefault();
      if (burst && k === "enter") return;
      const value = map[k];
      pending = setTimeout(() => { pending = null; answer(value); }, BURST_MS);
    }
  });

  function focusSerial() {
    if (!expectingUnit()) return;
    const a = document.activeElement;
    if (a && (a.tagName === "SELECT" || a.closest("details") || a.id === "retest" || a.id === "report-link")) return;
    if (a !== $("serial")) $("serial").focus();
  }

  // ---------------------------------------------------------------- drawing the state
  function render(s) {
    state = s;
    document.body.dataset.phase = s.phase;
    document.body.dataset.control = controlling() ? "yes" : "no";
    document.body.dataset.units = String((s.session && s.session.units) || 0);
    document.body.dataset.step = s.step && s.phase === "running" ? s.step.id : "";
    document.body.dataset.moving = s.progress && s.progress.fraction > 0 && s.progress.fraction < 1 ? "yes" : "no";
    text($("plan-name"), s.plan ? (s.plan.id + " v" + s.plan.version + " · " + s.plan.product) : "no plan");
    renderSupply(s.supply || {});
    text($("blocked"), s.blocked ? "Testing is blocked: " + s.blocked : "");
    show($("blocked"), !!s.blocked);
    show($("closing"), !!s.closing);
    text($("alarm"), s.alarm ? "⚠ " + s.alarm : "");
    show($("alarm"), !!s.alarm);
    if (s.notice) note(s.notice);
    show($("watching"), active() && !controlling());

    show($("scan-form"), expectingUnit());
    $("serial").disabled = !expectingUnit();
    show($("current"), !!s.serial && s.phase !== "idle");
    text($("unit-serial"), s.serial);
    text($("phase-text"), { starting: "starting …", preflight: "before the first step", running: "testing",
      finished: "done" }[s.phase] || "");

    renderAsk(s.ask);
    renderLive(s);
    renderRecording(s);
    renderVerdict(s.result, s.phase);
    renderSteps(s.steps || []);
    renderChecks(s.checks || []);
    renderHistory(s.history || []);
    renderTally(s.tally || {});
    renderCautions(s);
    renderStation(s);
    focusSerial();
  }

  function renderSupply(sp) {
    const box = $("supply");
    box.dataset.state = sp.state || "unknown";
    text($("supply-word"), SUPPLY[sp.state] || "?");
    text($("supply-text"), (sp.text || "") + (sp.at ? " · " + sp.at : ""));
  }

  function renderAsk(a) {
    const box = $("ask");
    show(box, !!a);
    if (!a) { box.dataset.kind = ""; return; }
    const wasHidden = box.dataset.askId !== String(a.id);
    box.dataset.kind = a.kind;
    box.dataset.askId = String(a.id);
    const kinds = { hazard: "Hazard " + a.index + " of " + a.count, yesno: "Question", done: "Instruction",
      retry: "The step did not pass" };
    text($("ask-kind"), kinds[a.kind] || "Answer needed");
    text($("ask-title"), a.kind === "hazard" ? String(a.hazard).replace(/_/g, " ") : "");
    text($("ask-text"), a.text);
    const visible = { hazard: ["ask-ack", "ask-decline"], yesno: ["ask-yes", "ask-no"], done: ["ask-done"],
      retry: ["ask-retry", "ask-giveup"] }[a.kind] || [];
    document.querySelectorAll(".ask-buttons button").forEach((b) => {
      show(b, visible.includes(b.id));
      b.disabled = !controlling();
    });
    if (wasHidden && controlling()) box.focus();
  }

  function renderLive(s) {
    const on = s.phase === "running" && !!s.step;
    show($("live"), on);
    if (!on) return;
    text($("step-count"), "Step " + s.step.index + " of " + s.step.total + ":");
    text($("step-title"), s.step.title);
    const p = s.progress;
    $("step-progress").value = p ? p.fraction : 0;
    text($("progress-text"), p ? p.text : "");
    text($("time-left"), p && p.left != null ? p.left.toFixed(1) + " s left" : "");
  }

  function renderRecording(s) {
    // a capture being taken is drawn from its previews as they come; until the first, say so
    const recording = s.phase === "running" && s.step && s.step.kind === "capture";
    const live = wave && wave.recording && recording && wave.step === s.step.id;
    if (recording && !live) {
      $("wave").dataset.recording = "waiting";
      text($("wave-caption"), "Recording step " + s.step.id + " … its samples are drawn here as they arrive" +
        (wave && wave.n && !wave.recording ? " (shown now: step " + wave.step + ")." : "."));
    } else {
      drawWave();
    }
  }

  function renderVerdict(r, phase) {
    const box = $("verdict");
    show(box, !!r && phase === "finished");
    if (!r) return;
    box.dataset.verdict = r.verdict;
    text($("verdict-word"), WORDS[r.verdict] || r.verdict);
    text($("verdict-serial"), "Unit " + r.serial);
    const said = r.stopped && !String(r.reason).includes(r.stopped);  // main's runner says Ctrl-C
    text($("verdict-reason"), said ? (r.stopped + ". " + r.reason) : r.reason);
    const list = $("failed");
    list.replaceChildren();
    (r.failed || []).forEach((f) => {
      const li = el("li");
      li.append(el("strong", null, (MARKS[f.verdict] || "") + " " + f.step + (f.measurement ? " · " + f.measurement : "") + ": "));
      li.append(document.createTextNode(f.reason || ""));
      list.append(li);
    });
    text($("verdict-safe"), (r.safe_state || []).join("; "));
    const link = $("report-link");
    show(link, !!r.report);
    if (r.report) link.href = r.report;
    $("retest").disabled = !canRetest();
  }

  function renderSteps(steps) {
    const list = $("steps");
    list.replaceChildren();
    steps.forEach((st) => {
      const li = el("li");
      li.dataset.status = st.status;
      li.append(el("span", "mark", st.status === "pending" ? "" : st.status));
      const body = el("span", null, st.title);
      if (st.error) body.append(el("span", "quiet", " — " + st.error));
      li.append(body);
      list.append(li);
    });
  }

  function renderChecks(checks) {
    const body = $("checks").tBodies[0];
    body.replaceChildren();
    checks.forEach((c) => {
      const tr = el("tr");
      tr.dataset.verdict = c.verdict;
      tr.append(el("td", null, c.step), el("td", null, c.measurement), el("td", "num", c.value),
        el("td", "num", c.window));
      const v = el("td", "v", (MARKS[c.verdict] || "") + " " + (WORDS[c.verdict] || c.verdict));
      v.title = c.reason || "";  // each failed check's reason is listed under the verdict
      tr.append(v);
      body.append(tr);
    });
    show($("no-checks"), checks.length === 0);
  }

  function renderHistory(runs) {
    const list = $("history");
    list.replaceChildren();
    runs.forEach((h) => {
      const li = el("li");
      li.append(el("span", null, (h.started || "").replace("T", " ").slice(0, 19)));
      li.append(el("span", "st", WORDS[h.status] || h.status));
      li.append(el("span", null, h.reason || ""));
      if (h.report) {
        const a = el("a", null, " report");
        a.href = h.report; a.target = "_blank"; a.rel = "noopener";
        li.append(a);
      }
      list.append(li);
    });
    show($("no-history"), runs.length === 0);
  }

  function renderTally(t) {
    text($("tally-tested"), t.tested || 0);
    text($("tally-passed"), t.passed || 0);
    text($("tally-fpy"), t.fpy == null ? "–" : (100 * t.fpy).toFixed(0) + " %");
    text($("tally-top"), t.top_failure ? t.top_failure.label + " (" + t.top_failure.count + "×)" : "none");
  }

  function renderCautions(s) {
    const list = $("cautions");
    list.replaceChildren();
    ((s.plan && s.plan.cautions) || []).forEach((c) => list.append(el("li", null, c)));
    ((s.plan && s.plan.hazards) || []).forEach((h) => list.append(el("li", null, "Hazard " + h.name + ": " + h.text)));
    const msgs = $("messages");
    msgs.replaceChildren();
    (s.messages || []).filter((m) => m.kind === "warning" || m.kind === "info").forEach((m) => {
      const li = el("li", null, m.text);
      li.dataset.kind = m.kind;
      msgs.append(li);
    });
  }

  function renderStation(s) {
    const sel = $("plan-select");
    const names = (s.plans || []).map((p) => p.name).join("\n");
    if (sel.dataset.names !== names) {
      sel.replaceChildren();
      (s.plans || []).forEach((p) => {
        const o = el("option", null, p.label + (p.error ? " (cannot be used)" : ""));
        o.value = p.name;
        sel.append(o);
      });
      sel.dataset.names = names;
    }
    if (s.plan) sel.value = s.plan.file;
    sel.disabled = active() || (s.plans || []).length < 2;
    $("new-session").disabled = active();
    const body = $("instruments").tBodies[0];
    body.replaceChildren();
    ((s.station && s.station.instruments) || []).forEach((i) => {
      const tr = el("tr");
      const cal = el("td", null, i.calibration);
      cal.dataset.cal = i.cal_status;
      tr.append(el("td", null, i.role), el("td", null, i.kind), el("td", null, i.address),
        el("td", null, i.identity || "not asked yet"), cal);
      body.append(tr);
    });
  }

  // ---------------------------------------------------------------- the waveform
  function number(n) { return String(n).replace(/\B(?=(\d{3})+(?!\d))/g, " "); }
  function seconds(t, span, top) {
    // a time on an axis, with enough digits to tell its two ends apart
    const unit = Math.abs(top) < 1 ? 1000 : 1;
    const digits = Math.min(6, Math.max(0, 2 - Math.floor(Math.log10(Math.max(span * unit, 1e-9)))));
    return (t * unit).toFixed(digits) + (unit === 1000 ? " ms" : " s");
  }

  function drawWave() {
    // a finished capture, or the preview of the one being taken (wave.recording: its columns
    // span the whole length asked for, filled as the samples arrive; the detail is the newest)
    const canvas = $("wave");
    const ratio = window.devicePixelRatio || 1;
    const w = canvas.clientWidth, h = canvas.clientHeight;
    canvas.width = Math.max(1, Math.round(w * ratio));
    canvas.height = Math.max(1, Math.round(h * ratio));
    const g = canvas.getContext("2d");
    g.setTransform(ratio, 0, 0, ratio, 0, 0);
    g.clearRect(0, 0, w, h);
    const preview = !!wave && (!!wave.recording || !!wave.ended);
    canvas.dataset.recording = wave && wave.recording ? "yes" : "no";
    canvas.dataset.received = wave ? String(preview ? wave.received : wave.n) : "0";
    canvas.dataset.step = wave && wave.step ? wave.step : "";
    if (!wave || (!wave.n && !preview)) {
      text($("wave-caption"), "A capture is drawn here as soon as it has been recorded.");
      canvas.dataset.points = "0";
      return;
    }
    const left = 60, right = 8, gap = 26;
    const span = (wave.vmax - wave.vmin) || 1;
    const lo = wave.vmin - 0.05 * span, hi = wave.vmax + 0.05 * span;
    const panelH = (h - gap * 2) / 2;
    const y = (v, top) => top + panelH * (1 - (v - lo) / (hi - lo));
    const axes = (top, t0, t1) => {
      g.strokeStyle = "#b9c0c7"; g.lineWidth = 1;
      g.beginPath(); g.moveTo(left, top); g.lineTo(left, top + panelH); g.lineTo(w - right, top + panelH); g.stroke();
      g.fillStyle = "#3d4852"; g.font = "12px sans-serif";
      g.fillText(wave.vmax.toPrecision(3) + " V", 2, y(wave.vmax, top) + 4);
      g.fillText(wave.vmin.toPrecision(3) + " V", 2, y(wave.vmin, top) + 4);
      const a = seconds(t0, t1 - t0, t1), b = seconds(t1, t1 - t0, t1);
      g.fillText(a, left, top + panelH + 14);
      g.fillText(b, w - right - g.measureText(b).width, top + panelH + 14);
    };
    // whole capture: min and max of each column
    const cols = wave.lo.length;
    const x = (i, n) => left + (w - left - right) * (i / Math.max(1, n - 1));
    axes(4, 0, wave.duration);
    g.strokeStyle = "#1b3f73"; g.lineWidth = 1.2;
    g.beginPath();
    for (let i = 0; i < cols; i++) {
      if (wave.lo[i] == null || wave.hi[i] == null) continue;
      g.moveTo(x(i, cols), y(wave.lo[i], 4));
      g.lineTo(x(i, cols), y(wave.hi[i], 4) - 0.5);
    }
    g.stroke();
    if (preview) {  // where the samples have got to, and a word on the picture itself
      const at = left + (w - left - right) * Math.min(1, wave.received / wave.expected);
      g.strokeStyle = "#8a4b00"; g.lineWidth = 2; g.setLineDash([4, 3]);
      g.beginPath(); g.moveTo(at, 4); g.lineTo(at, 4 + panelH); g.stroke();
      g.setLineDash([]);
      g.fillStyle = "#8a4b00"; g.font = "bold 14px sans-serif";
      const word = wave.recording ? "recording…" : "recording ended";
      g.fillText(word, w - right - g.measureText(word).width - 4, 20);
    }
    // detail: consecutive samples from the middle of the capture (a preview: the newest)
    const det = wave.detail || [];
    const top2 = 4 + panelH + gap;
    axes(top2, wave.detail_start, wave.detail_start + det.length / wave.rate);
    g.strokeStyle = "#0b6640"; g.lineWidth = 1.5;
    g.beginPath();
    let pen = false;
    for (let i = 0; i < det.length; i++) {
      if (det[i] == null) { pen = false; continue; }
      if (pen) g.lineTo(x(i, det.length), y(det[i], top2)); else g.moveTo(x(i, det.length), y(det[i], top2));
      pen = true;
    }
    g.stroke();
    canvas.dataset.points = String(cols);
    const where = "step " + (wave.step || "?") + ", channel " + wave.channel;
    if (wave.recording) {
      text($("wave-caption"), "Recording… " + where + ": " + number(wave.received) + " of " +
        number(wave.expected) + " samples at " + number(Math.round(wave.rate)) + " S/s so far. Top: the capture " +
        "so far; bottom: the newest " + det.length + " samples.");
    } else if (wave.ended) {
      text($("wave-caption"), "The recording of " + where + " ended after " + number(wave.received) + " of " +
        number(wave.expected) + " samples; no capture was kept from it.");
    } else {
      text($("wave-caption"), "Capture of " + where + ": " + number(wave.n) + " samples at " +
        number(Math.round(wave.rate)) + " S/s, drawn once taken. Top: the whole capture; bottom: " + det.length +
        " consecutive samples from its middle.");
    }
  }
  window.addEventListener("resize", drawWave);

  // ---------------------------------------------------------------- the live stream
  function connect() {
    const es = new EventSource("/events");
    es.addEventListener("state", (e) => {
      show($("link-lost"), false);
      render(JSON.parse(e.data));
      document.body.dataset.version = e.lastEventId;
    });
    es.addEventListener("wave", (e) => { wave = JSON.parse(e.data); drawWave(); });
    es.addEventListener("closing", () => { es.close(); show($("closing"), true); });
    es.onerror = () => { if (es.readyState !== EventSource.CLOSED) show($("link-lost"), true); };
  }
  connect();
})();

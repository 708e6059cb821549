// lockstep shift dashboard. Plain JavaScript, no framework, no build step.
//
// Data: GET /api/v1/characteristics (summaries), /api/v1/characteristics/NAME
// (the full report), /api/v1/alerts?state=all, and the server-sent events of
// /api/v1/stream (summary, alert, resync). Every name that comes from the
// data is put into the page with textContent or as an attribute value,
// never as markup.
"use strict";
(function () {
  const SVG = "http://www.w3.org/2000/svg";
  const TREND = 60; // p values kept per characteristic for the trend
  const HISTORY = 30; // evaluations listed in a detail's recent history

  const st = {
    summaries: new Map(), // name → jsonSummary
    trends: new Map(), // name → [{t, p, alpha}]
    history: new Map(), // name → [summary]
    alerts: new Map(), // id → alert
    alertsAvailable: true,
    token: sessionStorage.getItem("lockstep-token") || "",
    detail: null, // {name, report}
    tiles: new Map(), // name → tile element
    alertRows: new Map(), // id → {root, info, form}
    route: { view: "overview" },
    es: null,
  };

  // ---- DOM helpers -------------------------------------------------------
  function el(tag, attrs, ...kids) {
    const e = document.createElement(tag);
    setAttrs(e, attrs);
    append(e, kids);
    return e;
  }
  function svg(tag, attrs, ...kids) {
    const e = document.createElementNS(SVG, tag);
    setAttrs(e, attrs);
    append(e, kids);
    return e;
  }
  function setAttrs(e, attrs) {
    if (!attrs) return;
    for (const [k, v] of Object.entries(attrs)) {
      if (v === undefined || v === null || v === false) continue;
      if (k.startsWith("on")) throw new Error("no handler attributes: " + k);
      e.setAttribute(k, String(v));
    }
  }
  function append(e, kids) {
    for (const k of kids.flat()) {
      if (k === undefined || k === null || k === false) continue;
      e.appendChild(typeof k === "string" || typeof k === "number" ? document.createTextNode(String(k)) : k);
    }
  }
  const $ = (id) => document.getElementById(id);

  // ---- formatting --------------------------------------------------------
  function fnum(x, digits) {
    if (x === null || x === undefined || !isFinite(x)) return "–";
    const d = digits || 3;
    const a = Math.abs(x);
    if (a !== 0 && (a >= 1e6 || a < 1e-3)) return x.toExponential(d - 1);
    return Number(x.toPrecision(d)).toString();
  }
  function fp(p) {
    if (p === null || p === undefined || !isFinite(p)) return "–";
    if (p === 0) return "< 1e-300";
    if (p < 1e-4) return p.toExponential(1);
    return p.toPrecision(2);
  }
  function fshift(x, unit) {
    if (x === null || x === undefined || !isFinite(x)) return "–";
    return (x > 0 ? "+" : x < 0 ? "−" : "") + fnum(Math.abs(x)) + (unit ? " " + unit : "");
  }
  function ftime(s) {
    if (!s) return "–";
    const d = new Date(s);
    if (isNaN(d)) return "–";
    return d.toLocaleString(undefined, { hour: "2-digit", minute: "2-digit", second: "2-digit", day: "2-digit", month: "short" });
  }
  const KINDS = {
    "means-diverge": "means diverge",
    "spread-diverge": "spread diverges",
    "group-silent": "group silent",
    "input-rejected": "input rejected",
  };

  // ---- states ------------------------------------------------------------
  const RANK = { raised: 3, acknowledged: 2, watch: 1 };
  function stateOf(name) {
    let best = "quiet";
    for (const a of st.alerts.values()) {
      if (a.characteristic !== name) continue;
      if ((RANK[a.state] || 0) > (RANK[best] || 0)) best = a.state;
    }
    return best;
  }
  function topAlert(name) {
    let best = null;
    for (const a of st.alerts.values()) {
      if (a.characteristic !== name || !RANK[a.state]) continue;
      if (!best || RANK[a.state] > RANK[best.state]) best = a;
    }
    return best;
  }
  function stateBadge(state) {
    const icon = svg("svg", { viewBox: "0 0 20 20", "aria-hidden": "true" });
    switch (state) {
      case "raised": icon.appendChild(svg("polygon", { points: "10,1 19,10 10,19 1,10", fill: "currentColor" })); break;
      case "watch": icon.appendChild(svg("polygon", { points: "10,2 19,18 1,18", fill: "none", stroke: "currentColor", "stroke-width": "2.5" })); break;
      case "acknowledged":
        icon.appendChild(svg("rect", { x: "2", y: "2", width: "16", height: "16", fill: "currentColor" }));
        icon.appendChild(svg("polyline", { points: "5,10 9,14 15,6", fill: "none", stroke: "#fff", "stroke-width": "2.5" }));
        break;
      case "cleared": icon.appendChild(svg("line", { x1: "3", y1: "10", x2: "17", y2: "10", stroke: "currentColor", "stroke-width": "3" })); break;
      default: icon.appendChild(svg("circle", { cx: "10", cy: "10", r: "7", fill: "none", stroke: "currentColor", "stroke-width": "2.5" }));
    }
    return el("span", { class: "state", "data-state": state }, icon, state);
  }

  // ---- data --------------------------------------------------------------
  async function getJSON(url) {
    const r = await fetch(url, { cache: "no-store", headers: authHeaders() });
    if (!r.ok) {
      const e = new Error(url + ": " + r.status);
      e.status = r.status;
      throw e;
    }
    return r.json();
  }
  function authHeaders() {
    return st.token ? { Authorization: "Bearer " + st.token } : {};
  }
  // setToken keeps the daemon's token for this tab: in sessionStorage for
  // the Authorization header of writes, and in a same-site cookie for reads,
  // because the event stream cannot send a header (the daemon accepts the
  // cookie for reads only).
  function setToken(v) {
    st.token = v;
    sessionStorage.setItem("lockstep-token", v);
    document.cookie = "lockstep_token=" + encodeURIComponent(v) + "; path=/; SameSite=Strict" + (location.protocol === "https:" ? "; Secure" : "");
  }
  // askToken shows the token form when the daemon refuses reads (it listens
  // beyond loopback and needs its token for everything).
  function askToken(status) {
    const form = $("token-form");
    if (!form || !form.hidden) return;
    $("token-why").textContent = status === 403 ? "The token was refused: enter the daemon's token." : "This daemon needs its token to show its data: enter it.";
    form.hidden = false;
  }
  async function loadAll() {
    try {
      const s = await getJSON("/api/v1/characteristics");
      for (const x of s.characteristics || []) takeSummary(x, false);
    } catch (e) {
      if (e.status === 401 || e.status === 403) askToken(e.status);
      /* otherwise shown by the link state */
    }
    try {
      const a = await getJSON("/api/v1/alerts?state=all");
      st.alerts.clear();
      for (const x of a.alerts || []) st.alerts.set(x.id, x);
      st.alertsAvailable = true;
    } catch (e) {
      st.alertsAvailable = false;
    }
    render();
    if (st.route.view === "detail") loadDetail(st.route.name);
  }
  function takeSummary(s, live) {
    const prev = st.summaries.get(s.name);
    st.summaries.set(s.name, s);
    if (prev && prev.evaluated === s.evaluated) return;
    const tr = st.trends.get(s.name) || [];
    const p = s.test_p !== null && s.test_p !== undefined ? s.test_p : s.p;
    tr.push({ t: s.evaluated, p: p });
    if (tr.length > TREND) tr.shift();
    st.trends.set(s.name, tr);
    const h = st.history.get(s.name) || [];
    h.unshift(s);
    if (h.length > HISTORY) h.pop();
    st.history.set(s.name, h);
    if (live && st.route.view === "detail" && st.route.name === s.name) loadDetail(s.name);
  }
  function takeAlert(a) {
    const old = st.alerts.get(a.id);
    if (old && old.updated && a.updated && new Date(a.updated) < new Date(old.updated)) return; // an older event
    st.alerts.set(a.id, a);
  }
  let detailLoading = false, detailAgain = false;
  async function loadDetail(name) {
    if (detailLoading) { detailAgain = true; return; }
    detailLoading = true;
    try {
      const r = await getJSON("/api/v1/characteristics/" + encodeURIComponent(name));
      if (st.route.view === "detail" && st.route.name === name) {
        st.detail = { name: name, report: r };
        renderDetail();
      }
    } catch (e) {
      if (st.route.view === "detail" && st.route.name === name) {
        st.detail = { name: name, report: null, error: e.status === 404 ? "No report for this characteristic yet." : "The report could not be loaded." };
        renderDetail();
      }
    } finally {
      detailLoading = false;
      if (detailAgain) { detailAgain = false; loadDetail(st.route.name); }
    }
  }

  // ---- the stream --------------------------------------------------------
  function connect() {
    const link = $("link");
    const es = new EventSource("/api/v1/stream");
    st.es = es;
    es.addEventListener("open", () => {
      link.dataset.link = "live";
      link.textContent = "live";
      loadAll();
    });
    es.addEventListener("summary", (m) => {
      try { takeSummary(JSON.parse(m.data), true); } catch (e) { return; }
      renderSoon();
    });
    es.addEventListener("alert", (m) => {
      let ev;
      try { ev = JSON.parse(m.data); } catch (e) { return; }
      if (ev && ev.alert) takeAlert(ev.alert);
      renderSoon();
    });
    es.addEventListener("resync", () => loadAll());
    es.addEventListener("error", () => {
      link.dataset.link = "down";
      link.textContent = "reconnecting…";
      if (es.readyState === EventSource.CLOSED) {
        // The browser gave up (the server answered with an error): find
        // out whether it wants the token, and try again ourselves.
        loadAll();
        setTimeout(connect, 3000);
      }
    });
  }
  let renderQueued = false;
  function renderSoon() {
    if (renderQueued) return;
    renderQueued = true;
    requestAnimationFrame(() => { renderQueued = false; render(); });
  }

  // ---- routing -----------------------------------------------------------
  function parseRoute() {
    const h = location.hash || "#/";
    if (h.startsWith("#/c/")) {
      let name = h.slice(4);
      try { name = decodeURIComponent(name); } catch (e) { /* keep as is */ }
      return { view: "detail", name: name };
    }
    if (h === "#/alerts") return { view: "alerts" };
    return { view: "overview" };
  }
  function route() {
    st.route = parseRoute();
    $("view-overview").hidden = st.route.view !== "overview";
    $("view-detail").hidden = st.route.view !== "detail";
    $("view-alerts").hidden = st.route.view !== "alerts";
    const onAlerts = st.route.view === "alerts";
    $(onAlerts ? "nav-alerts" : "nav-overview").setAttribute("aria-current", "page");
    $(onAlerts ? "nav-overview" : "nav-alerts").removeAttribute("aria-current");
    if (st.route.view === "detail") {
      st.boxes = null;
      st.detail = { name: st.route.name, report: null };
      renderDetail();
      loadDetail(st.route.name);
    }
    render();
    window.scrollTo(0, 0);
  }
  function detailHref(name) { return "#/c/" + encodeURIComponent(name); }

  // ---- rendering ---------------------------------------------------------
  function render() {
    renderCount();
    if (st.route.view === "overview") renderOverview();
    if (st.route.view === "alerts") renderAlerts();
    if (st.route.view === "detail") renderDetailAlerts();
  }
  function renderCount() {
    let open = 0, raised = 0;
    for (const a of st.alerts.values()) {
      if (a.state === "raised") raised++;
      if (RANK[a.state]) open++;
    }
    const c = $("alert-count");
    c.textContent = String(open);
    c.dataset.raised = raised > 0 ? "yes" : "no";
  }

  function renderOverview() {
    const names = [...st.summaries.keys()].sort();
    $("overview-empty").hidden = names.length > 0;
    const box = $("tiles");
    for (const [n, t] of st.tiles) if (!st.summaries.has(n)) { t.remove(); st.tiles.delete(n); }
    for (const name of names) {
      let t = st.tiles.get(name);
      if (!t) {
        t = el("a", { class: "tile", href: detailHref(name), "data-characteristic": name });
        st.tiles.set(name, t);
      }
      fillTile(t, st.summaries.get(name));
      box.appendChild(t); // keeps the order by name
    }
  }
  function fillTile(t, s) {
    const state = stateOf(s.name);
    t.dataset.state = state;
    const a = topAlert(s.name);
    const test = s.test || "F";
    const f = s.test_f !== null && s.test_f !== undefined ? s.test_f : s.f;
    const p = s.test_p !== null && s.test_p !== undefined ? s.test_p : s.p;
    const kids = [
      el("div", { class: "tile-head" }, el("h2", null, s.name), stateBadge(state)),
      el("p", { class: "figure" }, test + " " + fnum(f) + "  ·  p " + fp(p)),
    ];
    if (a) {
      kids.push(el("p", { class: "line moved", "data-alert": a.id }, alertLine(a)));
    }
    const moved = (s.divergent || []).map((d) => d.name + " " + fshift(d.shift, s.unit));
    kids.push(el("p", { class: "line" }, moved.length ? ["moved: ", el("span", { class: "moved" }, moved.join(", "))] : "no group stands out"));
    if (s.spread) kids.push(el("p", { class: "line" }, "spread: " + s.spread.name + " SD × " + fnum(s.spread.sd_ratio)));
    kids.push(el("p", { class: "line small" }, "detectable now: " + (s.minimum_detectable_shift !== null && s.minimum_detectable_shift !== undefined ? fnum(s.minimum_detectable_shift) + (s.unit ? " " + s.unit : "") : "–")));
    const silent = (s.groups || []).filter((g) => g.silent).map((g) => g.name);
    const n = (s.groups || []).reduce((acc, g) => acc + (g.n || 0), 0);
    kids.push(el("p", { class: "line small" }, (s.groups || []).length + " groups, n " + n + (silent.length ? " · silent: " + silent.join(", ") : "") + (s.incomplete ? " · incomplete" : "")));
    kids.push(trendChart(st.trends.get(s.name) || [], 300, 46, "spark"));
    t.replaceChildren(...kids);
    t.setAttribute("aria-label", s.name + ", " + state);
  }
  function alertLine(a) {
    const kind = KINDS[a.kind] || a.kind;
    const groups = (a.groups || []).join(", ");
    let txt = a.state + ": " + kind + (groups ? " — " + groups : "");
    if (a.kind === "means-diverge" && a.shift !== null) txt += " " + fshift(a.shift, a.unit);
    if (a.kind === "spread-diverge" && a.ratio !== null) txt += " SD × " + fnum(a.ratio);
    if (a.kind === "input-rejected" && a.reject_rate !== null) txt += " " + fnum(a.reject_rate * 100) + " % rejected";
    return txt;
  }

  // trendChart draws −log10 p over the kept evaluations, with the level
  // of p = 0.05 dashed.
  function trendChart(tr, w, h, cls) {
    const g = svg("svg", { viewBox: "0 0 " + w + " " + h, class: "chart " + cls, role: "img", "aria-label": "trend of p" });
    const ys = tr.map((x) => (x.p > 0 ? Math.min(-Math.log10(x.p), 30) : x.p === 0 ? 30 : NaN));
    const top = Math.max(4, ...ys.filter(isFinite));
    const y = (v) => h - 3 - (v / top) * (h - 6);
    g.appendChild(svg("line", { class: "alpha", x1: 0, x2: w, y1: y(-Math.log10(0.05)), y2: y(-Math.log10(0.05)) }));
    if (tr.length > 1) {
      const pts = [];
      ys.forEach((v, i) => { if (isFinite(v)) pts.push((i / (TREND - 1)) * w + "," + y(v)); });
      g.appendChild(svg("polyline", { class: "trend", points: pts.join(" ") }));
    }
    return g;
  }

  // ---- detail ------------------------------------------------------------
  // The detail view has four parts, made once per visit: the head, the
  // charts, the alerts (updated in place, so that a form being filled in
  // keeps its text and focus) and the tables.
  function detailBoxes() {
    const v = $("view-detail");
    if (!st.boxes || st.boxes.name !== st.route.name) {
      st.boxes = { name: st.route.name, head: el("div"), top: el("div"), alerts: el("div", { class: "panel", id: "detail-alerts" }), bottom: el("div") };
      v.replaceChildren(st.boxes.head, st.boxes.top, st.boxes.alerts, st.boxes.bottom);
    }
    return st.boxes;
  }
  function renderDetail() {
    const d = st.detail;
    if (!d) return;
    const bx = detailBoxes();
    const s = st.summaries.get(d.name);
    const back = el("button", { type: "button", class: "back" }, "← all characteristics");
    back.addEventListener("click", () => { location.hash = "#/"; });
    const head = el("div", { class: "detail-head" }, back, el("h1", null, d.name), stateBadge(stateOf(d.name)));
    head.dataset.characteristic = d.name;
    const kids = [head];
    const r = d.report;
    renderDetailAlerts();
    if (!r) {
      kids.push(el("p", { class: "empty" }, d.error || "Loading…"));
      bx.head.replaceChildren(...kids);
      bx.top.replaceChildren();
      bx.bottom.replaceChildren();
      return;
    }
    const unit = r.unit || "";
    kids.push(el("p", { class: "verdict" }, r.verdict ? r.verdict.text : ""));
    kids.push(el("p", { class: "small" }, "window " + ftime(r.window.from) + " to " + ftime(r.window.to) + " · evaluated " + ftime(r.evaluated) + " · " + r.rows + " values"));
    bx.head.replaceChildren(...kids);
    bx.top.replaceChildren(el("div", { class: "grid2" },
      el("div", { class: "panel" }, el("h3", null, "Group means, " + pct(r.options.confidence) + " intervals, analysis-of-means limits"), meansChart(r)),
      el("div", { class: "panel" }, el("h3", null, "Values in the window"), boxChart(r))));
    const more = [];
    more.push(el("div", { class: "grid2" },
      el("div", { class: "panel" }, el("h3", null, "Groups"), groupsTable(r)),
      el("div", { class: "panel" }, el("h3", null, "One-way table"), anovaTable(r), el("h3", null, "Welch and spread tests"), testsTable(r))));
    kids.push(el("div", { class: "grid2" },
      el("div", { class: "panel" }, el("h3", null, "Pairs (Tukey–Kramer, Games–Howell)"), pairsTable(r, unit)),
      el("div", { class: "panel" }, el("h3", null, "Recent history"), trendChart(st.trends.get(d.name) || [], 600, 120, "hist"), historyTable(d.name))));
    if (r.notes && r.notes.length) more.push(el("div", { class: "panel" }, el("h3", null, "Notes"), el("ul", null, r.notes.map((n) => el("li", null, n)))));
    bx.bottom.replaceChildren(...more);
  }
  function pct(x) { return x ? Math.round(x * 100) + " %" : ""; }

  // meansChart: each group's mean with its confidence interval against the
  // grand mean, and each group's analysis-of-means decision limits.
  function meansChart(r) {
    const groups = r.groups || [];
    const aom = new Map(((r.analysis_of_means && r.analysis_of_means.groups) || []).map((g) => [g.name, g]));
    const W = 600, H = 280, L = 70, R = 10, T = 10, B = 40;
    const g = svg("svg", { viewBox: "0 0 " + W + " " + H, class: "chart", role: "img", "aria-label": "group means and decision limits" });
    const vals = [];
    for (const x of groups) {
      for (const v of [x.mean, x.ci_lower, x.ci_upper]) if (v !== null && isFinite(v)) vals.push(v);
      const a = aom.get(x.name);
      if (a) for (const v of [a.lower_limit, a.upper_limit]) if (v !== null && isFinite(v)) vals.push(v);
    }
    if (r.grand_mean !== null) vals.push(r.grand_mean);
    if (!groups.length || !vals.length) { g.appendChild(svg("text", { x: 10, y: 30 }, "not available")); return g; }
    const [y, ticks] = scale(vals, H - B, T);
    axis(g, ticks, y, L, W - R);
    const step = (W - L - R) / groups.length;
    if (r.grand_mean !== null) {
      g.appendChild(svg("line", { class: "grand", x1: L, x2: W - R, y1: y(r.grand_mean), y2: y(r.grand_mean) }));
      g.appendChild(svg("text", { x: W - R - 4, y: y(r.grand_mean) - 4, "text-anchor": "end" }, "grand mean " + fnum(r.grand_mean, 5)));
    }
    groups.forEach((x, i) => {
      const cx = L + step * (i + 0.5);
      const a = aom.get(x.name);
      if (a && a.lower_limit !== null && a.upper_limit !== null) {
        for (const v of [a.lower_limit, a.upper_limit]) g.appendChild(svg("line", { class: "limit", x1: cx - step * 0.35, x2: cx + step * 0.35, y1: y(v), y2: y(v) }));
      }
      if (x.ci_lower !== null && x.ci_upper !== null) g.appendChild(svg("line", { class: "ci", x1: cx, x2: cx, y1: y(x.ci_lower), y2: y(x.ci_upper) }));
      const out = a && a.out !== "within";
      if (x.mean !== null) {
        if (out) {
          const m = y(x.mean), s = 8;
          g.appendChild(svg("polygon", { class: "mean-out", points: [cx, m - s, cx + s, m, cx, m + s, cx - s, m].join(" ") }, svg("title", null, x.name + ": outside the limits")));
        } else {
          g.appendChild(svg("circle", { class: "mean-in", cx: cx, cy: y(x.mean), r: 6 }));
        }
      }
      g.appendChild(svg("text", { x: cx, y: H - B + 18, "text-anchor": "middle", "font-weight": out ? "700" : "400" }, x.name));
    });
    return g;
  }
  // boxChart: quartiles and median of the kept values, whiskers to the
  // group's min and max.
  function boxChart(r) {
    const qs = new Map((r.quantiles || []).map((q) => [q.name, q]));
    const groups = (r.groups || []).filter((x) => qs.has(x.name) && qs.get(x.name).median !== null);
    const W = 600, H = 280, L = 70, R = 10, T = 10, B = 40;
    const g = svg("svg", { viewBox: "0 0 " + W + " " + H, class: "chart", role: "img", "aria-label": "box plots" });
    if (!groups.length) { g.appendChild(svg("text", { x: 10, y: 30 }, "no values kept in this window")); return g; }
    const vals = [];
    for (const x of groups) {
      const q = qs.get(x.name);
      for (const v of [x.min, x.max, q.q1, q.q3]) if (v !== null && isFinite(v)) vals.push(v);
    }
    const [y, ticks] = scale(vals, H - B, T);
    axis(g, ticks, y, L, W - R);
    const step = (W - L - R) / groups.length;
    groups.forEach((x, i) => {
      const q = qs.get(x.name);
      const cx = L + step * (i + 0.5), bw = Math.min(60, step * 0.5);
      if (x.min !== null && x.max !== null) g.appendChild(svg("line", { class: "whisker", x1: cx, x2: cx, y1: y(x.min), y2: y(x.max) }));
      g.appendChild(svg("rect", { class: "box", x: cx - bw / 2, width: bw, y: y(q.q3), height: Math.max(1, y(q.q1) - y(q.q3)) }));
      g.appendChild(svg("line", { class: "median", x1: cx - bw / 2, x2: cx + bw / 2, y1: y(q.median), y2: y(q.median) }));
      g.appendChild(svg("text", { x: cx, y: H - B + 18, "text-anchor": "middle" }, x.name));
      g.appendChild(svg("text", { x: cx, y: H - B + 34, "text-anchor": "middle", class: "small" }, q.kept < q.n ? "kept " + q.kept + " of " + q.n : "n " + q.n));
    });
    return g;
  }
  function scale(vals, bottom, top) {
    let lo = Math.min(...vals), hi = Math.max(...vals);
    if (hi === lo) { hi += 1; lo -= 1; }
    const pad = (hi - lo) * 0.08;
    lo -= pad; hi += pad;
    const y = (v) => bottom - ((v - lo) / (hi - lo)) * (bottom - top);
    const raw = (hi - lo) / 5, mag = Math.pow(10, Math.floor(Math.log10(raw)));
    const stepv = [1, 2, 5, 10].map((m) => m * mag).find((s) => s >= raw);
    const ticks = [];
    for (let t = Math.ceil(lo / stepv) * stepv; t <= hi; t += stepv) ticks.push(t);
    return [y, ticks];
  }
  function axis(g, ticks, y, x0, x1) {
    for (const t of ticks) {
      g.appendChild(svg("line", { class: "axis", x1: x0 - 4, x2: x0, y1: y(t), y2: y(t) }));
      g.appendChild(svg("text", { x: x0 - 6, y: y(t) + 4, "text-anchor": "end" }, fnum(t, 5)));
    }
    g.appendChild(svg("line", { class: "axis", x1: x0, x2: x0, y1: y(ticks[0] !== undefined ? ticks[0] : 0), y2: y(ticks[ticks.length - 1] !== undefined ? ticks[ticks.length - 1] : 0) }));
    g.appendChild(svg("line", { class: "axis", x1: x0, x2: x1, y1: y(ticks[0]), y2: y(ticks[0]), "stroke-opacity": "0" }));
  }
  function table(head, rows) {
    return el("table", null, el("thead", null, el("tr", null, head.map((h) => el("th", null, h)))), el("tbody", null, rows));
  }
  function groupsTable(r) {
    const aom = new Map(((r.analysis_of_means && r.analysis_of_means.groups) || []).map((g) => [g.name, g]));
    const counts = r.counts || [];
    const rows = (r.groups || []).map((x) => el("tr", { "data-out": aom.has(x.name) ? aom.get(x.name).out : "within" },
      el("td", null, x.name), el("td", null, x.n), el("td", null, fnum(x.mean, 6)), el("td", null, fnum(x.sd)),
      el("td", null, fnum(x.ci_lower, 6) + " to " + fnum(x.ci_upper, 6)), el("td", null, fnum(x.min, 6)), el("td", null, fnum(x.max, 6))));
    for (const c of counts) if (c.silent) rows.push(el("tr", null, el("td", null, c.name), el("td", null, c.n), el("td", { colspan: 5 }, "silent since " + ftime(c.last))));
    return table(["group", "n", "mean", "SD", "interval", "min", "max"], rows);
  }
  function anovaTable(r) {
    const a = r.anova || {};
    const rows = [
      el("tr", null, el("td", null, "Between"), el("td", null, fnum(a.df_between)), el("td", null, fnum(a.ss_between, 5)), el("td", null, fnum(a.ms_between, 5)), el("td", null, fnum(a.f)), el("td", null, fp(a.p))),
      el("tr", null, el("td", null, "Within"), el("td", null, fnum(a.df_within)), el("td", null, fnum(a.ss_within, 5)), el("td", null, fnum(a.ms_within, 5)), el("td", null, ""), el("td", null, "")),
      el("tr", null, el("td", null, "Total"), el("td", null, fnum(a.df_total)), el("td", null, fnum(a.ss_total, 5)), el("td", null, ""), el("td", null, ""), el("td", null, "")),
    ];
    return el("div", null, table(["", "df", "SS", "MS", "F", "p"], rows),
      el("p", { class: "small" }, "R² " + fnum(a.r2) + " · adjusted R² " + fnum(a.adj_r2) + " · ω² " + fnum(a.omega2) + " · residual SD " + fnum(a.residual_sd)));
  }
  function testsTable(r) {
    const row = (name, t, stat, df) => el("tr", null, el("td", null, name), el("td", null, t ? fnum(t[stat]) : "–"), el("td", null, t ? df(t) : "–"), el("td", null, t ? fp(t.p) : "–"));
    const f = (t) => fnum(t.df1) + ", " + fnum(t.df2);
    return table(["test", "statistic", "df", "p"], [
      row("Welch F", r.welch, "f", f),
      row("Bartlett", r.bartlett, "statistic", (t) => fnum(t.df)),
      row("Levene", r.levene, "f", f),
      row("Brown–Forsythe", r.brown_forsythe, "f", f),
      row("Kruskal–Wallis", r.kruskal_wallis, "h", (t) => fnum(t.df)),
    ]);
  }
  function pairsTable(r, unit) {
    const rows = (r.pairs || []).map((x) => el("tr", null, el("td", null, x.b + " − " + x.a), el("td", null, fshift(x.diff, unit)),
      el("td", null, x.tukey ? fnum(x.tukey.lwr) + " to " + fnum(x.tukey.upr) : "–"), el("td", null, x.tukey ? fp(x.tukey.p) : "–"),
      el("td", null, x.games_howell ? fp(x.games_howell.p) : "–")));
    return table(["pair", "difference", "interval", "Tukey p", "Games–Howell p"], rows);
  }
  function historyTable(name) {
    const rows = (st.history.get(name) || []).slice(0, 10).map((s) => el("tr", null, el("td", null, ftime(s.evaluated)), el("td", null, s.test || "F"),
      el("td", null, fnum(s.test_f !== null && s.test_f !== undefined ? s.test_f : s.f)), el("td", null, fp(s.test_p !== null && s.test_p !== undefined ? s.test_p : s.p)),
      el("td", null, (s.divergent || []).map((d) => d.name + " " + fshift(d.shift, s.unit)).join(", ") || "–")));
    return el("div", null, table(["evaluated", "test", "F", "p", "moved"], rows), el("p", { class: "small" }, "since this page was opened"));
  }

  // ---- alerts ------------------------------------------------------------
  function sortedAlerts(filter) {
    const list = [...st.alerts.values()].filter(filter);
    list.sort((a, b) => (RANK[b.state] || 0) - (RANK[a.state] || 0) || String(b.updated || b.opened).localeCompare(String(a.updated || a.opened)));
    return list;
  }
  // fillAlerts puts the rows of list into box, updating them in place when
  // the list is the same as before, so that nothing focused moves.
  function fillAlerts(box, list) {
    const rows = list.map((a) => alertRow(a).root);
    const same = rows.length === box.children.length && rows.every((r, i) => box.children[i] === r);
    if (!same) box.replaceChildren(...rows);
  }
  function renderDetailAlerts() {
    if (!st.detail || !st.boxes) return;
    const sec = st.boxes.alerts;
    if (!sec.firstChild) {
      sec.append(el("h3", null, "Alerts of this characteristic"), el("p", { class: "empty" }), el("div", { class: "alert-list" }));
    }
    const list = sortedAlerts((a) => a.characteristic === st.detail.name);
    sec.children[1].textContent = !st.alertsAvailable ? "Alerts are not available from this server." : list.length ? "" : "No alert.";
    fillAlerts(sec.children[2], list);
    const head = document.querySelector("#view-detail .detail-head .state");
    if (head) head.replaceWith(stateBadge(stateOf(st.detail.name)));
  }
  function renderAlerts() {
    const note = $("alerts-note");
    const list = sortedAlerts(() => true);
    note.textContent = !st.alertsAvailable ? "Alerts are not available from this server." : list.length ? "" : "No alert is open or recently cleared.";
    fillAlerts($("alert-list"), list);
  }
  // alertRow returns the cached row of an alert, its figures brought up to
  // date; its acknowledgement form is kept across updates so that what is
  // being typed stays.
  function alertRow(a) {
    let row = st.alertRows.get(a.id);
    if (!row) {
      row = { root: el("article", { class: "alert", "data-alert": a.id }), info: el("div"), form: null };
      row.root.appendChild(row.info);
      st.alertRows.set(a.id, row);
    }
    row.root.dataset.state = a.state;
    const kind = KINDS[a.kind] || a.kind;
    const groups = (a.groups || []).join(", ");
    const figs = [];
    if (a.kind === "means-diverge" && a.shift !== null && a.shift !== undefined) figs.push("shift " + fshift(a.shift, a.unit) + (a.lower !== null && a.upper !== null ? " (" + fnum(a.lower) + " to " + fnum(a.upper) + ")" : ""));
    if (a.test) figs.push(a.test + " " + fnum(a.f));
    if (a.p !== null && a.p !== undefined) figs.push("p " + fp(a.p));
    if (a.kind === "spread-diverge" && a.ratio !== null && a.ratio !== undefined) figs.push("SD ratio " + fnum(a.ratio));
    if (a.kind === "input-rejected" && a.reject_rate !== null && a.reject_rate !== undefined) figs.push("rejected " + fnum(a.reject_rate * 100) + " %");
    if (a.detector) figs.push("detector " + a.detector);
    const link = el("a", { href: detailHref(a.characteristic) }, a.characteristic);
    const info = [
      el("div", { class: "tile-head" }, el("span", { class: "what" }, link, " · " + kind + (groups ? " — " + groups : "")), stateBadge(a.state)),
      el("p", { class: "line" }, figs.join(" · ")),
      a.reason ? el("p", { class: "line small" }, a.reason) : null,
      el("p", { class: "line small" }, "opened " + ftime(a.opened) + (a.raised ? " · raised " + ftime(a.raised) : "") +
        (a.acknowledged ? " · acknowledged " + ftime(a.acknowledged) + " by " + (a.acknowledged_by || "–") : "") + (a.cleared ? " · cleared " + ftime(a.cleared) : "")),
      a.note ? el("p", { class: "line" }, "note: " + a.note) : null,
    ];
    row.info.replaceChildren(...info.filter(Boolean));
    if (a.state === "raised") {
      if (!row.form) { row.form = ackForm(a.id); row.root.appendChild(row.form); }
    } else if (row.form) {
      row.form.remove();
      row.form = null;
    }
    return row;
  }
  function ackForm(id) {
    const by = el("input", { name: "by", autocomplete: "name", required: "required" });
    const note = el("input", { name: "note" });
    const token = el("input", { name: "token", type: "password", autocomplete: "off" });
    token.value = st.token;
    const tokenLabel = el("label", { hidden: st.token ? false : "hidden" }, "Token", token);
    const err = el("p", { class: "error", role: "alert" });
    const btn = el("button", { type: "submit" }, "Acknowledge");
    const form = el("form", { class: "ack", "data-alert": id },
      el("label", null, "Your name", by), el("label", null, "Note", note), tokenLabel, btn, err);
    form.addEventListener("submit", async (e) => {
      e.preventDefault();
      err.textContent = "";
      if (!by.value.trim()) { err.textContent = "Give your name."; return; }
      if (token.value) setToken(token.value);
      btn.disabled = true;
      try {
        const r = await fetch("/api/v1/alerts/" + encodeURIComponent(id) + "/ack", {
          method: "POST",
          headers: Object.assign({ "Content-Type": "application/json" }, authHeaders()),
          body: JSON.stringify({ by: by.value.trim(), note: note.value }),
        });
        let body = null;
        try { body = await r.json(); } catch (x) { body = null; }
        if (r.status === 401 || r.status === 403) {
          tokenLabel.hidden = false;
          err.textContent = r.status === 401 ? "This daemon needs its token to acknowledge: enter it and send again." : "The token was refused.";
          return;
        }
        if (!r.ok) { err.textContent = (body && body.error) || "The acknowledgement failed (" + r.status + ")."; return; }
        if (body && body.id) takeAlert(body);
        render();
      } catch (x) {
        err.textContent = "The daemon could not be reached.";
      } finally {
        btn.disabled = false;
      }
    });
    return form;
  }

  window.addEventListener("hashchange", route);
  document.addEventListener("DOMContentLoaded", () => {
    if (st.token) setToken(st.token);
    const tf = $("token-form");
    tf.addEventListener("submit", (e) => {
      e.preventDefault();
      const v = $("token-input").value;
      if (!v) return;
      setToken(v);
      tf.hidden = true;
      if (st.es) st.es.close();
      connect();
    });
    route();
    connect();
  });
})();

// The what-if page: every change re-plans through POST /api/plan; names are set as text only.
"use strict";
(function () {
  const data = JSON.parse(document.getElementById("scenario-data").textContent);
  const cur = data.currency;
  const sep = cur && /[A-Za-z0-9]$/.test(cur) ? " " : "";
  const whole = new Intl.NumberFormat("en-US", { maximumFractionDigits: 0 });
  const cents = new Intl.NumberFormat("en-US", { minimumFractionDigits: 2, maximumFractionDigits: 2 });
  const qty = new Intl.NumberFormat("en-US", { maximumFractionDigits: 1 });
  const $ = (id) => document.getElementById(id);
  const inputs = Array.from(document.querySelectorAll("input[data-kind]"));
  let basePlan = null, sequence = 0, shown = 0, timer = null, lastChanges = [];

  function money(x, fmt) {
    const f = fmt || whole;
    const text = f.format(Math.abs(x));
    const sign = x < 0 && text.replace(/[0.,]/g, "") !== "" ? "-" : "";
    return sign + cur + sep + text;
  }
  function text(el, value) { el.textContent = value; return el; }
  function cell(row, value, numeric) {
    const td = document.createElement("td");
    if (numeric) td.className = "num";
    text(td, value);
    row.appendChild(td);
    return td;
  }

  function changes() {
    const out = [];
    for (const el of inputs) {
      const k = Number(el.dataset.index);
      if (el.dataset.kind === "option") {
        if (el.checked) out.push({ option: data.options[k].name, field: "taken", set: 1, control: el });
        continue;
      }
      const entry = el.dataset.kind === "resource" ? data.resources[k] : data.products[k];
      const raw = el.value.trim();
      const value = Number(raw);
      if (raw !== "" && Number.isFinite(value) && value === entry[el.dataset.field]) continue;
      const change = { field: el.dataset.field, set: raw, control: el };
      change[el.dataset.kind] = entry.name;
      out.push(change);
    }
    return out;
  }

  function mark(problems, list) {
    for (const el of inputs) el.classList.remove("bad");
    for (const p of problems || []) {
      const m = /^changes\[(\d+)\]/.exec(p.where || "");
      if (m && list[Number(m[1]) - 1]) list[Number(m[1]) - 1].control.classList.add("bad");
    }
  }

  async function post(url, body) {
    const res = await fetch(url, { method: "POST", headers: { "Content-Type": "application/json" },
                                   body: JSON.stringify(body) });
    let answer = null;
    try { answer = await res.json(); } catch (e) { answer = { error: "the server's answer was not JSON" }; }
    return { ok: res.ok, status: res.status, answer };
  }

  function plain(list) { return list.map(({ control, ...c }) => c); }

  async function replan() {
    const list = changes();
    lastChanges = list;
    const mine = ++sequence;
    document.body.dataset.state = "busy";
    text($("busy"), "planning …");
    let r;
    try {
      r = await post("/api/plan", { changes: plain(list) });
    } catch (e) {
      r = { ok: false, status: 0, answer: { error: "the server cannot be reached: is planner serve still running?" } };
    }
    if (mine !== sequence) return;  // a later change is on its way
    text($("busy"), "");
    if (!r.ok) {
      const box = $("error");
      text(box, r.answer.error || ("refused (" + r.status + ")"));
      box.hidden = false;
      mark(r.answer.problems, list);
      document.body.dataset.state = "error";
      return;
    }
    $("error").hidden = true;
    mark([], list);
    if (basePlan === null && list.length === 0) basePlan = r.answer;
    render(r.answer);
    shown += 1;
    document.body.dataset.plans = String(shown);
    document.body.dataset.state = "ready";
  }

  function schedule() {
    clearTimeout(timer);
    timer = setTimeout(replan, 150);
  }

  function bottlenecks(plan) {
    return plan.resources.map((r, k) => ({ r, k })).filter((x) => x.r.binding)
      .sort((a, b) => (b.r.value_of_one_percent - a.r.value_of_one_percent) || (b.r.shadow_price - a.r.shadow_price));
  }

  function render(plan) {
    text($("profit"), money(plan.profit));
    if (basePlan !== null && plan !== basePlan) {
      const d = plan.profit - basePlan.profit;
      text($("change"), (Math.abs(d) < 0.5 ? "as the scenario" : (d > 0 ? "+" : "") + money(d) + " against the scenario"));
    } else {
      text($("change"), "the scenario as written");
    }
    text($("gap"), (100 * plan.gap).toFixed(2) + " %");
    text($("status"), plan.status === "optimal" ? "optimal: no plan beats " + money(plan.bound)
                                                 : "time limit reached; bound " + money(plan.bound));
    const running = plan.products.filter((p) => p.running).length;
    text($("running"), running + " of " + plan.products.length);
    const off = plan.products.map((p, k) => p.running ? null : data.products[k].label).filter((x) => x);
    text($("stopped"), off.length ? "shut down: " + off.join(", ") : "every product runs");
    const necks = bottlenecks(plan);
    if (necks.length) {
      const top = necks[0];
      text($("bottleneck"), data.resources[top.k].label);
      const u = data.resources[top.k].unit;
      text($("bottleneck-price"), money(top.r.shadow_price, cents) + (u ? " per " + u : " per unit") +
           " of extra capacity");
    } else {
      text($("bottleneck"), "none");
      text($("bottleneck-price"), "every resource has spare capacity");
    }
    const labour = $("labour");
    labour.hidden = !plan.touches_people;
    text(labour, data.labour_note);
    const pt = document.querySelector("#products-table tbody");
    pt.replaceChildren();
    plan.products.forEach((p, k) => {
      const row = document.createElement("tr");
      row.className = p.running ? "on" : "off";
      cell(row, data.products[k].label);
      cell(row, p.running ? (p.must_run ? (p.forced === "min_volume" ? "committed" : "must run") : "runs") : "shut down");
      cell(row, qty.format(p.volume) + " " + data.products[k].unit, true);
      cell(row, p.price === null ? "—" : money(p.price, cents), true);
      cell(row, money(p.profit), true);
      pt.appendChild(row);
    });
    const rt = document.querySelector("#resources-table tbody");
    rt.replaceChildren();
    plan.resources.forEach((r, k) => {
      const row = document.createElement("tr");
      row.className = r.binding ? "bind" : "";
      const u = data.resources[k].unit ? " " + data.resources[k].unit : "";
      cell(row, data.resources[k].label);
      cell(row, qty.format(r.used) + u, true);
      cell(row, qty.format(r.capacity) + u, true);
      cell(row, (100 * r.utilisation).toFixed(0) + " %", true);
      cell(row, r.shadow_price > 0 ? money(r.shadow_price, cents) + " per " + (data.resources[k].unit || "unit") : "0", true);
      rt.appendChild(row);
    });
    const warn = $("warnings");
    warn.replaceChildren();
    for (const w of plan.warnings || []) {
      const li = document.createElement("li");
      text(li, "Warning: " + w);
      warn.appendChild(li);
    }
    drawMix(plan);
    drawUse(plan);
  }

  const SVG = "http://www.w3.org/2000/svg";
  function svgEl(name, attrs, parent) {
    const el = document.createElementNS(SVG, name);
    for (const [k, v] of Object.entries(attrs)) el.setAttribute(k, String(v));
    if (parent) parent.appendChild(el);
    return el;
  }
  function label(parent, x, y, value, anchor, cls) {
    const t = svgEl("text", { x, y, "text-anchor": anchor || "start", "dominant-baseline": "middle",
                              class: cls || "lbl" }, parent);
    t.textContent = value;
    return t;
  }

  function drawMix(plan) {
    const svg = $("mix-chart");
    svg.replaceChildren();
    const rowH = 26, top = 10, left = 190, width = 900, half = (width - left - 20) / 2;
    const h = top + rowH * plan.products.length + 10;
    svg.setAttribute("viewBox", "0 0 " + width + " " + h);
    const vmax = Math.max(1, ...plan.products.map((p) => p.volume));
    const pmax = Math.max(1, ...plan.products.map((p) => Math.abs(p.profit)));
    plan.products.forEach((p, k) => {
      const y = top + k * rowH;
      label(svg, left - 8, y + rowH / 2, data.products[k].label, "end");
      const w = (half - 90) * p.volume / vmax;
      svgEl("rect", { x: left, y: y + 4, width: Math.max(w, 0), height: rowH - 8,
                      class: p.running ? "bar-on" : "bar-off" }, svg);
      label(svg, left + w + 4, y + rowH / 2, p.running ? qty.format(p.volume) : "shut down");
      const x0 = left + half + 40 + (half - 120) / 2;
      const pw = ((half - 120) / 2) * p.profit / pmax;
      svgEl("rect", { x: Math.min(x0, x0 + pw), y: y + 4, width: Math.abs(pw), height: rowH - 8,
                      class: !p.running ? "bar-off" : (p.profit >= 0 ? "bar-profit" : "bar-loss") }, svg);
      label(svg, p.profit >= 0 ? x0 + pw + 4 : x0 + pw - 4, y + rowH / 2, money(p.profit), p.profit >= 0 ? "start" : "end");
    });
    svg.dataset.bars = String(plan.products.length);
  }

  function drawUse(plan) {
    const svg = $("use-chart");
    svg.replaceChildren();
    const rowH = 26, top = 10, left = 190, width = 900, span = 420;
    const h = top + rowH * Math.max(plan.resources.length, 1) + 10;
    svg.setAttribute("viewBox", "0 0 " + width + " " + h);
    plan.resources.forEach((r, k) => {
      const y = top + k * rowH;
      label(svg, left - 8, y + rowH / 2, data.resources[k].label, "end");
      svgEl("rect", { x: left, y: y + 4, width: span, height: rowH - 8, class: "bar-room" }, svg);
      svgEl("rect", { x: left, y: y + 4, width: span * Math.min(r.utilisation, 1.0), height: rowH - 8,
                      class: r.binding ? "bar-bind" : "bar-on" }, svg);
      const u = data.resources[k].unit;
      label(svg, left + span + 8, y + rowH / 2, (100 * r.utilisation).toFixed(0) + " %" +
            (r.shadow_price > 0 ? " · " + money(r.shadow_price, cents) + (u ? "/" + u : "") : ""));
    });
    svg.dataset.bars = String(plan.resources.length);
  }

  async function save() {
    const name = $("variant-name").value.trim();
    const description = $("variant-description").value.trim();
    const list = changes();
    const r = await post("/api/save", { name, description, changes: plain(list) });
    const box = $("saved");
    if (r.ok) {
      text(box, "Saved '" + r.answer.saved + "' to " + r.answer.file + " (a copy; the scenario file is unchanged).");
      box.className = "note";
    } else {
      text(box, r.answer.error || ("refused (" + r.status + ")"));
      box.className = "note bad-text";
      mark(r.answer.problems, list);
    }
  }

  function reset() {
    for (const el of inputs) {
      const k = Number(el.dataset.index);
      if (el.dataset.kind === "option") el.checked = false;
      else {
        const entry = el.dataset.kind === "resource" ? data.resources[k] : data.products[k];
        el.value = String(entry[el.dataset.field]);
      }
    }
    schedule();
  }

  for (const el of inputs) el.addEventListener(el.dataset.kind === "option" ? "change" : "input", schedule);
  $("reset").addEventListener("click", reset);
  $("save").addEventListener("click", save);
  replan();
})();

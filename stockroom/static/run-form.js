// Live preview of the run form: as replicates are typed, ask the preview API (which stores
// nothing) and show each replicate's molarity, the statistics, the budget and the verdict.
// Without this script the form still works: "Compute" asks the server for the same result.
(function () {
  "use strict";
  var form = document.getElementById("run-form");
  if (!form) { return; }
  var method = form.dataset.method;
  var tbody = document.querySelector("#replicates tbody");
  var body = document.getElementById("preview-body");
  var addRow = document.getElementById("add-row");
  var timer = null;
  var seq = 0;
  var cols = method === "primary"
    ? ["gross_g", "tare_g", "mass_g", "initial_ml", "final_ml", "blank_ml", "temperature_c"]
    : ["aliquot_ml", "initial_ml", "final_ml", "blank_ml", "temperature_c"];

  function val(name) {
    var el = form.elements[name];
    return el ? el.value.trim() : "";
  }
  function num(text) {
    // Send exactly what was typed when it is not a plain number, so the API names the problem.
    if (/^[+-]?(\d+\.?\d*|\.\d+)$/.test(text)) { return parseFloat(text); }
    return text;
  }
  function el(tag, text, cls) {
    var e = document.createElement(tag);
    if (text !== undefined && text !== null) { e.textContent = text; }
    if (cls) { e.className = cls; }
    return e;
  }
  function pct(x, d) { return x === null || x === undefined ? "—" : (x * 100).toFixed(d) + " %"; }
  function decimalsFor(U) { return U > 0 ? Math.max(0, 1 - Math.floor(Math.log10(U))) : 5; }

  function rows() { return Array.prototype.slice.call(tbody.querySelectorAll("tr[data-row]")); }

  function buildRequest() {
    var req = {
      titrant: form.dataset.titrant,
      nominal_molarity: parseFloat(form.dataset.nominal),
      min_replicates: parseInt(form.dataset.minReplicates, 10),
      max_rsd: parseFloat(form.dataset.maxRsd),
      replicates: [],
      exclusions: []
    };
    // The figures of the balance, burette or pipette chosen replace the defaults, as when recording.
    var figures = JSON.parse(form.dataset.instrumentFigures || "{}");
    ["balance_id", "burette_id", "pipette_id"].forEach(function (name) {
      var chosen = val(name);
      if (chosen && figures[chosen]) {
        Object.keys(figures[chosen]).forEach(function (k) { req[k] = figures[chosen][k]; });
      }
    });
    var cap = val("burette_capacity_ml");
    if (cap) { req.burette_capacity_ml = num(cap); }
    var runT = val("temperature_c");
    if (method === "primary") {
      var lot = form.elements.standard_lot_id.selectedOptions[0];
      if (!lot || !lot.value) { return { problem: "Choose the primary-standard lot to see the result." }; }
      req.standard = lot.dataset.substance;
      req.purity = parseFloat(lot.dataset.assay);
      req.purity_U = parseFloat(lot.dataset.assayU);
      req.purity_k = parseFloat(lot.dataset.assayK);
    } else {
      var ref = form.elements.reference_batch.selectedOptions[0];
      if (!ref || !ref.value) { return { problem: "Choose the certified reference batch to see the result." }; }
      req.reference = { molarity: parseFloat(ref.dataset.molarity), u: parseFloat(ref.dataset.u),
                        titrant: ref.dataset.titrant };
    }
    var map = [];
    rows().forEach(function (tr) {
      var i = tr.dataset.row;
      var raw = {};
      var any = false;
      cols.forEach(function (c) { raw[c] = val("r" + i + "_" + c); if (raw[c]) { any = true; } });
      if (!any) { return; }
      var rep = {};
      if (method === "primary") {
        if (raw.mass_g) { rep.mass_g = num(raw.mass_g); }
        else { if (raw.gross_g) { rep.gross_g = num(raw.gross_g); } if (raw.tare_g) { rep.tare_g = num(raw.tare_g); } }
      } else if (raw.aliquot_ml) { rep.aliquot_ml = num(raw.aliquot_ml); }
      if (raw.initial_ml) { rep.initial_ml = num(raw.initial_ml); }
      if (raw.final_ml) { rep.final_ml = num(raw.final_ml); }
      if (raw.blank_ml) { rep.blank_ml = num(raw.blank_ml); }
      var t = raw.temperature_c || runT;
      if (t) { rep.temperature_c = num(t); }
      var excl = form.elements["r" + i + "_exclude"];
      if (excl && excl.checked) {
        req.exclusions.push({ index: req.replicates.length,
                              reason: val("r" + i + "_exclude_reason") || "left out" });
      }
      map.push(i);
      req.replicates.push(rep);
    });
    if (!req.replicates.length) { return { problem: "Enter replicates to see the result." }; }
    return { req: req, map: map };
  }

  function clearMarks() {
    rows().forEach(function (tr) {
      tr.querySelectorAll(".live-error").forEach(function (e) { e.remove(); });
      tr.querySelectorAll("td.live-bad").forEach(function (td) { td.classList.remove("live-bad"); });
      var cell = tr.querySelector(".live-molarity");
      if (cell) { cell.textContent = ""; }
    });
  }

  function showErrors(errors, map) {
    var general = [];
    errors.forEach(function (e) {
      var m = /^replicates\[(\d+)\]\.?(\w*)/.exec(e.field);
      if (m) {
        var row = map[parseInt(m[1], 10)];
        var col = m[2] === "volume_ml" ? "final_ml" : (m[2] || "initial_ml");
        var input = form.elements["r" + row + "_" + col] || form.elements["r" + row + "_initial_ml"];
        if (input) {
          input.parentNode.classList.add("live-bad");
          input.parentNode.appendChild(el("span", e.message, "field-error live-error"));
          return;
        }
      }
      general.push(e.field + ": " + e.message);
    });
    body.replaceChildren();
    var box = el("div", null, "verdict verdict-fail");
    box.appendChild(el("strong", "Cannot compute yet — fix the marked entries."));
    if (general.length) {
      var ul = el("ul");
      general.forEach(function (g) { ul.appendChild(el("li", g)); });
      box.appendChild(ul);
    }
    body.appendChild(box);
  }

  function fact(dl, term, value) { dl.appendChild(el("dt", term)); dl.appendChild(el("dd", value)); }

  function showResult(res, map) {
    res.replicates.forEach(function (r, j) {
      var cell = tbody.querySelector('.live-molarity[data-row="' + map[j] + '"]');
      if (!cell) { return; }
      cell.textContent = r.molarity.toFixed(5);
      if (r.excluded) { cell.appendChild(el("span", " left out", "quiet")); }
      else if (r.outlier) { cell.appendChild(el("span", " possible outlier", "flag")); }
    });
    body.replaceChildren();
    var d = decimalsFor(res.U);
    body.appendChild(el("p", res.molarity.toFixed(d) + " ± " + res.U.toFixed(d) + " mol/L (k = " + res.k + ")",
                        "big-value"));
    var dl = el("dl", null, "facts");
    fact(dl, "Replicates used", res.n + " of " + res.n_total);
    fact(dl, "Standard deviation", res.sd === null ? "— (needs 2 or more)" : res.sd.toFixed(6) + " mol/L");
    fact(dl, "RSD", pct(res.rsd, 3));
    fact(dl, "95 % confidence interval of the mean",
         res.ci95[0] === null ? "—" : res.ci95[0].toFixed(6) + " to " + res.ci95[1].toFixed(6) + " mol/L");
    fact(dl, "Standard uncertainty u", res.u.toFixed(6) + " mol/L (" + pct(res.u_rel, 3) + ")");
    fact(dl, "Monte Carlo cross-check", "u = " + res.monte_carlo.u.toFixed(6) + " mol/L from " +
         res.monte_carlo.draws.toLocaleString("en") + " draws");
    body.appendChild(dl);
    if (res.accepted) {
      body.appendChild(el("p", "Meets the acceptance rule.", "verdict verdict-pass"));
    } else {
      var fail = el("div", null, "verdict verdict-fail");
      fail.appendChild(el("strong", "Does not meet the acceptance rule:"));
      var ul = el("ul");
      res.reasons.forEach(function (r) { ul.appendChild(el("li", r)); });
      fail.appendChild(ul);
      body.appendChild(fail);
    }
    if (res.warnings.length) {
      var w = el("div", null, "warnings");
      w.appendChild(el("strong", "Check:"));
      var wl = el("ul");
      res.warnings.forEach(function (x) { wl.appendChild(el("li", x)); });
      w.appendChild(wl);
      body.appendChild(w);
    }
    var table = el("table", null, "grid compact budget");
    table.appendChild(el("caption", "Uncertainty budget (GUM): each input's relative standard uncertainty and its share of u²"));
    var head = el("tr");
    ["Input", "u relative", "Share"].forEach(function (h) { head.appendChild(el("th", h)); });
    var thead = el("thead"); thead.appendChild(head); table.appendChild(thead);
    var tb = el("tbody");
    res.budget.forEach(function (b) {
      var tr = el("tr");
      tr.appendChild(el("td", b.source));
      tr.appendChild(el("td", pct(b.u_rel, 4), "num"));
      var share = el("td", null, "num");
      var meter = el("meter"); meter.min = 0; meter.max = 1; meter.value = b.share || 0;
      share.appendChild(meter);
      share.appendChild(document.createTextNode(" " + pct(b.share, 1)));
      tr.appendChild(share);
      tb.appendChild(tr);
    });
    table.appendChild(tb);
    body.appendChild(table);
  }

  function refresh() {
    var built = buildRequest();
    clearMarks();
    if (built.problem) {
      body.replaceChildren(el("p", built.problem, "quiet"));
      return;
    }
    var mine = ++seq;
    fetch(form.dataset.previewUrl, {
      method: "POST", headers: { "Content-Type": "application/json", "Accept": "application/json" },
      body: JSON.stringify(built.req), credentials: "same-origin"
    }).then(function (resp) {
      return resp.json().then(function (data) { return { status: resp.status, data: data }; });
    }).then(function (answer) {
      if (mine !== seq) { return; }  // a newer keystroke has asked again
      if (answer.status === 200) { showResult(answer.data, built.map); }
      else { showErrors(answer.data.errors || [], built.map); }
      form.dataset.previewState = answer.status === 200 ? "ok" : "errors";
    }).catch(function () {
      if (mine === seq) { body.replaceChildren(el("p", "The live result is unavailable; press Compute.", "quiet")); }
    });
  }

  function schedule() {
    if (timer) { clearTimeout(timer); }
    timer = setTimeout(refresh, 250);
  }

  // Enter in a grid cell moves to the same column of the next row (adding one if needed) instead
  // of submitting the form half-typed.
  tbody.addEventListener("keydown", function (ev) {
    if (ev.key !== "Enter" || ev.target.tagName !== "INPUT") { return; }
    ev.preventDefault();
    var tr = ev.target.closest("tr");
    var next = tr.nextElementSibling || appendRow();
    var firstCol = method === "primary" ? "gross_g" : "aliquot_ml";
    var target = form.elements["r" + next.dataset.row + "_" + firstCol];
    if (target) { target.focus(); }
  });

  function appendRow() {
    var all = rows();
    var last = all[all.length - 1];
    var n = all.length + 1;
    var copy = last.cloneNode(true);
    copy.dataset.row = String(n);
    copy.querySelector("th").textContent = String(n);
    copy.querySelectorAll("input").forEach(function (input) {
      input.name = input.name.replace(/^r\d+_/, "r" + n + "_");
      input.id = "f-" + input.name;
      if (input.type === "checkbox") { input.checked = false; } else { input.value = ""; }
      input.removeAttribute("aria-invalid");
      input.setAttribute("aria-label", (input.getAttribute("aria-label") || "").replace(/\d+/, String(n)));
    });
    copy.querySelectorAll(".field-error").forEach(function (e) { e.remove(); });
    copy.querySelectorAll(".has-error").forEach(function (e) { e.classList.remove("has-error"); });
    var cell = copy.querySelector(".live-molarity");
    cell.dataset.row = String(n);
    cell.textContent = "";
    tbody.appendChild(copy);
    return copy;
  }

  if (addRow) {
    addRow.hidden = false;
    addRow.addEventListener("click", function () { appendRow(); });
  }
  form.addEventListener("input", schedule);
  form.addEventListener("change", schedule);
  if (method === "primary") {
    form.elements.standard_lot_id.addEventListener("change", function () {
      var lot = this.selectedOptions[0];
      var hint = document.getElementById("mass-hint");
      if (lot && lot.value && hint) {
        hint.textContent = "About " + lot.dataset.suggested + " g gives a 40 mL titre at the nominal strength.";
        var ep = form.elements.endpoint;
        if (ep && !ep.value) { ep.value = lot.dataset.endpoint; }
      }
    });
  }
  schedule();
}());

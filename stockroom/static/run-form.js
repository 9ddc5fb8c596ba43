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
  // Field names come from the server: each grid input carries its replicate key (data-key) and the
  // page says which paths of the science core land on which column (data-path-aliases); top-level
  // fields are named as in the request. The script keeps no copy of that mapping.
  var aliases = JSON.parse(form.dataset.pathAliases || "{}");

  function val(name) {
    var el = form.elements[name];
    return el ? el.value.trim() : "";
  }
  function el(tag, text, cls) {
    var e = document.createElement(tag);
    if (text !== undefined && text !== null) { e.textContent = text; }
    if (cls) { e.className = cls; }
    return e;
  }

  function rows() { return Array.prototype.slice.call(tbody.querySelectorAll("tr[data-row]")); }

  function buildRequest() {
    var req = {
      titrant: form.dataset.titrant,
      nominal_molarity: parseFloat(form.dataset.nominal),
      min_replicates: parseInt(form.dataset.minReplicates, 10),
      max_rsd: parseFloat(form.dataset.maxRsd),
      replicates: []
    };
    // The figures of the balance, burette or pipette chosen replace the defaults, as when recording.
    var figures = JSON.parse(form.dataset.instrumentFigures || "{}");
    ["balance_id", "burette_id", "pipette_id"].forEach(function (name) {
      var chosen = val(name);
      if (chosen && figures[chosen]) {
        Object.keys(figures[chosen]).forEach(function (k) { req[k] = figures[chosen][k]; });
      }
    });
    // Typed text is sent as typed: the server's one parser reads it and names any problem.
    var cap = val("burette_capacity_ml");
    if (cap) { req.burette_capacity_ml = cap; }
    var runT = val("temperature_c");
    if (runT) { req.temperature_c = runT; }
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
    // A replicate's curve sits in its own box below the grid; it goes with its row, read by the same parser.
    ["curve_reading", "curve_method"].forEach(function (name) { if (val(name)) { req[name] = val(name); } });
    var map = [];
    rows().forEach(function (tr) {
      var rep = {};
      var any = false;
      tr.querySelectorAll("input[data-key]").forEach(function (input) {
        var key = input.dataset.key;
        if (key === "exclude" || key === "exclude_reason") { return; }
        if (input.value.trim()) { rep[key] = input.value.trim(); any = true; }
      });
      var curve = document.getElementById("f-r" + tr.dataset.row + "_curve");
      if (curve && curve.value.trim()) { rep.curve = curve.value; any = true; }
      if (!any) { return; }  // a blank row is skipped, as the server skips it
      var excl = tr.querySelector('input[data-key="exclude"]');
      if (excl && excl.checked) {
        var why = tr.querySelector('input[data-key="exclude_reason"]');
        rep.exclude_reason = why ? why.value.trim() : "";
      }
      map.push(tr.dataset.row);
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

  function inputFor(path, map) {
    var m = /^replicates\[(\d+)\]\.?(\w*)$/.exec(path);
    if (!m) { return form.elements[path] || null; }
    var tr = tbody.querySelector('tr[data-row="' + map[parseInt(m[1], 10)] + '"]');
    if (!tr) { return null; }
    var key = aliases[m[2]] || m[2];
    if (key === "curve") { return document.getElementById("f-r" + tr.dataset.row + "_curve"); }
    return tr.querySelector('input[data-key="' + key + '"]') || tr.querySelector("input[data-key]");
  }

  function showErrors(errors, map) {
    var general = [];
    errors.forEach(function (e) {
      var input = inputFor(e.field, map);
      if (input && input.closest("#replicates")) {
        input.parentNode.classList.add("live-bad");
        input.parentNode.appendChild(el("span", e.message, "field-error live-error"));
        return;
      }
      var label = input && input.id ? form.querySelector('label[for="' + input.id + '"]') : null;
      general.push((label ? label.textContent.trim() : e.field) + ": " + e.message);
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
    var shown = res.display;  // every figure as text, rounded by the server's formatter
    res.replicates.forEach(function (r, j) {
      var cell = tbody.querySelector('.live-molarity[data-row="' + map[j] + '"]');
      if (!cell) { return; }
      cell.textContent = shown.replicates[j];
      if (r.excluded) { cell.appendChild(el("span", " left out", "quiet")); }
      else if (r.outlier) { cell.appendChild(el("span", " possible outlier", "flag")); }
    });
    body.replaceChildren();
    body.appendChild(el("p", shown.molarity, "big-value"));
    var dl = el("dl", null, "facts");
    fact(dl, "Replicates used", res.n + " of " + res.n_total);
    fact(dl, "Standard deviation", shown.sd);
    fact(dl, "RSD", shown.rsd);
    fact(dl, "95 % confidence interval of the mean", shown.ci95);
    fact(dl, "Standard uncertainty u", shown.u);
    fact(dl, "Monte Carlo cross-check", shown.monte_carlo);
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
    res.budget.forEach(function (b, j) {
      var tr = el("tr");
      tr.appendChild(el("td", b.source));
      tr.appendChild(el("td", shown.budget[j].u_rel, "num"));
      var share = el("td", null, "num");
      var meter = el("meter"); meter.min = 0; meter.max = 1; meter.value = b.share || 0;
      share.appendChild(meter);
      share.appendChild(document.createTextNode(" " + shown.budget[j].share));
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
      // The form's own door: the server reads an unambiguous decimal comma as the form will (parsing.form_decimal).
      method: "POST", headers: { "Content-Type": "application/json", "Accept": "application/json", "X-Stockroom-Door": "form" },
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

  // Tab goes along a row's readings only (the cells typed from the balance and the burette); the
  // row's other controls (leave-out tick, its reason, any link) leave the Tab path and are reached
  // with the arrow keys from the row's cells, or by pointer. Without this script the natural order
  // keeps every control on the Tab path.
  var READING = "input[inputmode=decimal]";
  function offPath(row) {
    row.querySelectorAll("input, select, a, button").forEach(function (c) {
      if (!c.matches(READING)) { c.setAttribute("tabindex", "-1"); }
    });
  }
  rows().forEach(offPath);
  function atEdge(input, forward) {
    if (input.type !== "text" && input.type !== "") { return true; }  // a tick box: always at its edge
    try {
      var end = forward ? input.value.length : 0;
      return input.selectionStart === end && input.selectionEnd === end;
    } catch (e) { return true; }
  }
  tbody.addEventListener("keydown", function (ev) {
    if (ev.key !== "ArrowRight" && ev.key !== "ArrowLeft") { return; }
    var forward = ev.key === "ArrowRight";
    if (!atEdge(ev.target, forward)) { return; }
    var cells = Array.prototype.slice.call(ev.target.closest("tr").querySelectorAll("input, select, a, button"));
    var next = cells[cells.indexOf(ev.target) + (forward ? 1 : -1)];
    if (next) { ev.preventDefault(); next.focus(); }
  });
  // Ticking "leave out" asks for the reason at once.
  tbody.addEventListener("change", function (ev) {
    if (ev.target.dataset.key === "exclude" && ev.target.checked) {
      var why = ev.target.closest("tr").querySelector("[data-key=exclude_reason]");
      if (why) { why.focus(); }
    }
  });

  // Enter in a grid cell moves to the first column of the next row (adding one if needed) instead
  // of submitting the form half-typed.
  tbody.addEventListener("keydown", function (ev) {
    if (ev.key !== "Enter" || ev.target.tagName !== "INPUT") { return; }
    ev.preventDefault();
    var tr = ev.target.closest("tr");
    var next = tr.nextElementSibling || appendRow();
    var target = next.querySelector("input[data-key]");  // the row's first cell
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
    offPath(copy);
    appendCurveBox(n);
    return copy;
  }

  // An added row gets its curve box below the grid, a copy of the server's last one renamed to
  // r<n>_curve with the same label and help, so the form posts it as it posts a first row's curve.
  function appendCurveBox(n) {
    var boxes = document.querySelectorAll("#curves details.curve-box");
    if (!boxes.length) { return; }
    var last = boxes[boxes.length - 1];
    var box = last.cloneNode(true);
    var name = "r" + n + "_curve";
    box.dataset.row = String(n);
    box.open = false;
    box.querySelector("summary").textContent = "Replicate " + n;
    var area = box.querySelector("textarea");
    area.name = name;
    area.id = "f-" + name;
    area.textContent = "";  // the default value too, so a form reset leaves it empty
    area.value = "";
    area.removeAttribute("aria-invalid");
    var label = box.querySelector("label");
    label.htmlFor = area.id;
    label.textContent = label.textContent.replace(/\d+/, String(n));
    box.querySelectorAll(".field-error").forEach(function (e) { e.remove(); });
    box.querySelectorAll(".has-error").forEach(function (e) { e.classList.remove("has-error"); });
    last.after(box);
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
        // A suggestion, not the analyst's record: shown as a placeholder, so an empty field stores empty.
        if (ep) { ep.placeholder = "usually: " + lot.dataset.endpoint; }
      }
    });
  }
  schedule();
}());

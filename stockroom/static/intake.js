// The batch register form's live preparation calculator. Without this script the form still works:
// the "Work out amounts" button asks the server for the same plan. Everything drawn here uses
// textContent (never HTML from the answer), and the answer comes from POST /api/v1/preparation/plan.
(function () {
  "use strict";

  var form = document.querySelector("form[data-plan-url]");
  if (!form || !window.fetch) { return; }

  var catalogue = JSON.parse(form.getAttribute("data-catalogue") || "{}");
  var labels = JSON.parse(form.getAttribute("data-labels") || "{}");
  var planUrl = form.getAttribute("data-plan-url");
  var planBox = document.getElementById("plan");
  var stepsBox = document.getElementById("plan-steps");
  var warningBox = document.getElementById("plan-warnings");
  var cautionList = document.querySelector("#calculator .caution ul");
  var planFields = ["reagent", "nominal_molarity", "volume_l", "source_form", "concentrate_assay_pct",
                    "concentrate_density_g_ml", "water_grade"];
  var assayBaseHint = "In percent from the certificate: type 37 for 37 %. ";
  var timer = null;
  var asked = 0;  // answers are drawn only for the latest question, whatever order they arrive in

  Array.prototype.forEach.call(document.querySelectorAll(".js-only"), function (el) { el.hidden = false; });

  function el(tag, className, text) {
    var node = document.createElement(tag);
    if (className) { node.className = className; }
    if (text !== undefined) { node.textContent = text; }
    return node;
  }

  function control(name) { return form.elements.namedItem(name); }

  function hintOf(name) {
    var input = control(name);
    var field = input && input.closest(".field");
    return field ? field.querySelector("small.hint") : null;
  }

  function setList(list, lines) {
    if (!list) { return; }
    list.replaceChildren.apply(list, lines.map(function (line) { return el("li", "", line); }));
  }

  function onReagent() {
    var key = control("reagent").value;
    var entry = catalogue[key];
    var options = document.getElementById("nominal-options");
    var all = [];
    Object.keys(catalogue).forEach(function (k) {
      catalogue[k].nominals.forEach(function (n) { if (all.indexOf(n) < 0) { all.push(n); } });
    });
    var nominals = entry ? entry.nominals : all.sort(function (a, b) { return a - b; });
    options.replaceChildren.apply(options, nominals.map(function (n) {
      var o = document.createElement("option");
      o.value = n;
      return o;
    }));
    var nominalHint = hintOf("nominal_molarity");
    if (nominalHint) {
      nominalHint.textContent = entry ? "Usual for " + key + ": " + entry.nominals.join(", ") + " mol/L; pick or type"
                                      : "Pick from the list or type a value";
    }
    var assayHint = hintOf("concentrate_assay_pct");
    if (assayHint) { assayHint.textContent = assayBaseHint + (entry ? entry.typical : ""); }
    // Bases, and the salts of the other classes, are made from a solid; acids are not.
    var solid = control("source_form").querySelector("option[value=solid]");
    if (solid) {
      solid.disabled = !!entry && !entry.solid;
      if (solid.disabled && control("source_form").value === "solid") { control("source_form").value = "liquid"; }
    }
    if (entry) { setList(cautionList, entry.cautions); }
    onForm();
  }

  function onForm() {
    // A density means nothing for pellets; a disabled field is not sent, so none is stored.
    control("concentrate_density_g_ml").disabled = control("source_form").value === "solid";
    // What was measured: millilitres of a concentrate, grams of pellets.
    var unit = form.querySelector("label[for=f-measured_amount] .unit");
    if (unit) { unit.textContent = control("source_form").value === "solid" ? "(g of pellets)" : "(mL of concentrate)"; }
  }

  function drawPlan(answer) {
    var d = answer.display;
    var nodes = [];
    var summary = el("p", "plan-summary");
    summary.appendChild(el("strong", "", "For " + d.summary));
    nodes.push(summary);
    var figures = el("dl", "plan-figures");
    d.figures.forEach(function (f) {
      var row = el("div");
      row.appendChild(el("dt", "", f.label));
      var dd = el("dd");
      dd.appendChild(el("span", "plan-value", f.value));
      dd.appendChild(document.createTextNode(" "));
      dd.appendChild(el("small", "", f.detail));
      row.appendChild(dd);
      figures.appendChild(row);
    });
    nodes.push(figures);
    planBox.replaceChildren.apply(planBox, nodes);
    var how = [el("h3", "", "Steps")];
    var steps = el("ol", "plan-steps");
    setList(steps, d.instructions);
    how.push(steps);
    if (d.notes.length) {
      var notes = el("ul", "plan-notes");
      setList(notes, d.notes);
      how.push(notes);
    }
    stepsBox.replaceChildren.apply(stepsBox, how);
    setList(cautionList, d.cautions);
    drawWarnings(answer.warnings || []);
  }

  function drawWarnings(lines) {
    if (!lines.length) { warningBox.replaceChildren(); return; }
    var box = el("div", "notice notice-warning");
    box.setAttribute("role", "status");
    var list = el("ul", "plain");
    setList(list, lines);
    box.appendChild(list);
    warningBox.replaceChildren(box);
  }

  function drawProblems(errors) {
    var missing = errors.filter(function (e) { return /^is required/.test(e.message); });
    var wrong = errors.filter(function (e) { return !/^is required/.test(e.message); });
    var nodes = [];
    if (wrong.length) {
      nodes.push(el("p", "", "The amounts cannot be worked out yet:"));
      var list = el("ul", "plan-problems");
      setList(list, wrong.map(function (e) { return (labels[e.field] || e.field) + ": " + e.message; }));
      nodes.push(list);
    }
    if (missing.length) {
      var names = missing.map(function (e) { return labels[e.field] || e.field; });
      nodes.push(el("p", "quiet plan-empty", "Still needed for the amounts: " + names.join(", ") + "."));
    }
    planBox.replaceChildren.apply(planBox, nodes);
    stepsBox.replaceChildren();
    drawWarnings([]);
  }

  function ask() {
    var body = {};
    planFields.forEach(function (name) {
      var c = control(name);
      if (c && !c.disabled && c.value.trim() !== "") { body[name] = c.value; }
    });
    var mine = ++asked;
    planBox.setAttribute("aria-busy", "true");
    fetch(planUrl, {
      method: "POST",
      // The form's own door: the server reads an unambiguous decimal comma as the form will (parsing.form_decimal).
      headers: {"Content-Type": "application/json", "Accept": "application/json", "X-Stockroom-Door": "form"},
      credentials: "same-origin",
      body: JSON.stringify(body)
    }).then(function (resp) {
      return resp.json().then(function (data) { return {status: resp.status, data: data}; });
    }).then(function (r) {
      if (mine !== asked) { return; }
      planBox.removeAttribute("aria-busy");
      if (r.status === 200) { drawPlan(r.data); } else { drawProblems(r.data.errors || []); }
    }).catch(function () {
      if (mine !== asked) { return; }
      planBox.removeAttribute("aria-busy");
      planBox.replaceChildren(el("p", "quiet", "The amounts could not be fetched; use Work out amounts."));
      stepsBox.replaceChildren();
    });
  }

  function schedule(event) {
    var name = event.target && event.target.name;
    if (planFields.indexOf(name) < 0) { return; }
    if (name === "reagent") { onReagent(); }
    if (name === "source_form") { onForm(); }
    window.clearTimeout(timer);
    timer = window.setTimeout(ask, 250);
  }

  form.addEventListener("input", schedule);
  form.addEventListener("change", schedule);
  onReagent();
  // Draw the plan at once when the page comes back with the fields filled (a re-shown form).
  if (control("reagent").value) { ask(); }
}());

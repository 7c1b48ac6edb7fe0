// labelcalc workbench: sends the page's state as JSON and swaps in the HTML the server renders.
(function () {
  "use strict";
  var bench = document.getElementById("bench");
  if (!bench) { return; }
  var path = bench.getAttribute("data-path");
  var form = document.getElementById("form");
  var yaml = document.getElementById("yaml");
  var level = document.getElementById("level");
  var levelOut = document.getElementById("level-out");
  var statusBox = document.getElementById("status");
  var scenario = 0;
  var timer = null;
  var pending = 0;

  function markets() {
    return Array.prototype.map.call(document.querySelectorAll("input[name=market]:checked"), function (x) { return x.value; });
  }
  function state() {
    return {
      path: path, yaml: yaml.value, markets: markets(), scenario: scenario,
      replace: document.getElementById("replace").value, "with": document.getElementById("with").value,
      level: Number(level.value)
    };
  }
  function formValues() {
    var fields = {}, remove = [], add = {};
    Array.prototype.forEach.call(form.querySelectorAll("input[data-field]"), function (el) { fields[el.name] = el.value; });
    Array.prototype.forEach.call(form.querySelectorAll("input[name=remove]:checked"), function (el) { remove.push(el.value); });
    add.ref = form.querySelector("[name='add.ref']").value;
    add.id = form.querySelector("[name='add.id']").value;
    add.amount = form.querySelector("[name='add.amount']").value;
    return { fields: fields, remove: remove, add: add, structural: remove.length > 0 || (add.id && add.amount) };
  }
  function say(text, kind) {
    statusBox.textContent = text || "";
    statusBox.className = "status" + (kind ? " " + kind : "");
  }
  function post(url, body) {
    return fetch(url, { method: "POST", headers: { "Content-Type": "application/json" }, body: JSON.stringify(body) })
      .then(function (r) { return r.json().then(function (j) { j._ok = r.ok; return j; }, function () { return { _ok: r.ok, error: "the server sent no readable answer" }; }); });
  }
  function showFieldMessages(problems) {
    Array.prototype.forEach.call(form.querySelectorAll(".message"), function (m) { m.remove(); });
    Array.prototype.forEach.call(form.querySelectorAll(".has-problem"), function (m) { m.classList.remove("has-problem"); });
    (problems || []).forEach(function (p) {
      if (!p.field) { return; }
      var input = form.querySelector("input[data-field='" + p.field.replace(/'/g, "") + "']");
      if (!input) { return; }
      var span = document.createElement("span");
      span.className = "message"; span.setAttribute("role", "alert"); span.textContent = p.text;
      input.parentNode.appendChild(span);
      input.parentNode.classList.add("has-problem");
    });
  }
  function update(source) {
    var body = state();
    body.source = source;
    var structural = false;
    if (source === "form") {
      var fv = formValues();
      body.fields = fv.fields; body.remove = fv.remove; body.add = fv.add; structural = fv.structural;
    }
    pending += 1;
    bench.setAttribute("data-busy", "1");
    return post("/api/update", body).then(function (j) {
      pending -= 1;
      if (pending === 0) { bench.removeAttribute("data-busy"); }
      if (j.error && !j.results_html) { say(j.error, "bad"); return; }
      if (source === "form") {
        yaml.value = j.yaml;
        if (structural) { form.innerHTML = j.form_html; } else { showFieldMessages(j.problems); }
      } else {
        form.innerHTML = j.form_html;
      }
      document.getElementById("results").innerHTML = j.results_html;
      document.getElementById("chart").innerHTML = j.chart_html;
      say(j.notice || (j.problems && j.problems.length ? j.problems.length + " problem(s) to fix" : ""), j.notice || (j.problems && j.problems.length) ? "warn" : "");
      bench.setAttribute("data-updated", String(Date.now()));
    }, function () { pending -= 1; say("the workbench server does not answer; is it still running?", "bad"); });
  }
  function later(source, ms) {
    if (timer) { clearTimeout(timer); }
    timer = setTimeout(function () { timer = null; update(source); }, ms);
  }

  form.addEventListener("input", function () { later("form", 450); });
  form.addEventListener("change", function (e) { if (e.target.name === "remove" || e.target.name === "add.ref") { later("form", 50); } });
  yaml.addEventListener("input", function () { later("yaml", 600); });
  level.addEventListener("input", function () { levelOut.textContent = level.value + " %"; later("yaml", 150); });
  ["replace", "with"].forEach(function (id) { document.getElementById(id).addEventListener("change", function () { later("yaml", 0); }); });
  document.querySelectorAll("input[name=market]").forEach(function (el) { el.addEventListener("change", function () { later("yaml", 0); }); });
  document.getElementById("results").addEventListener("change", function (e) {
    if (e.target.name === "scenario") { scenario = Number(e.target.value); later("yaml", 0); }
  });
  document.getElementById("results").addEventListener("click", function (e) {
    var b = e.target.closest("button.fig");
    if (!b) { return; }
    var body = state();
    body.market = b.getAttribute("data-market"); body.nutrient = b.getAttribute("data-nutrient");
    body.basis = b.getAttribute("data-basis"); body.scenario_index = scenario;
    fetch("/api/trace", { method: "POST", headers: { "Content-Type": "application/json" }, body: JSON.stringify(body) })
      .then(function (r) { return r.text(); })
      .then(function (html) {
        var pane = document.getElementById("trace");
        var inner = document.getElementById("trace-body");
        if (html.charAt(0) === "{") { inner.textContent = JSON.parse(html).error; } else { inner.innerHTML = html; }
        pane.hidden = false;
      });
  });
  document.getElementById("trace-close").addEventListener("click", function () { document.getElementById("trace").hidden = true; });
  document.getElementById("save").addEventListener("click", function () {
    post("/api/save", state()).then(function (j) { say(j.message || j.error, j._ok ? (j.problems && j.problems.length ? "warn" : "good") : "bad"); });
  });
  document.getElementById("export").addEventListener("click", function () {
    say("writing the drafts…");
    post("/api/export", state()).then(function (j) {
      var text = j._ok ? j.message + (j.failures && j.failures.length ? " — PRE-FLIGHT CHECKS FAILED: " + j.failures.join("; ") : "") + " — " + j.draft : j.error;
      say(text, j._ok ? (j.failures && j.failures.length ? "warn" : "good") : "bad");
    });
  });
  if (document.getElementById("replace").value) { /* a default is offered; nothing runs until a replacement is chosen */ }
}());

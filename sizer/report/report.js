// sizer report: switch the page between the designs of the trade-off, sort and filter the
// schedule. Plain script, no library, nothing loaded from the network. Without it the
// page shows the design it was written for, in full.
(function () {
  "use strict";
  var el = document.getElementById("sizer-data");
  if (!el) { return; }
  var data = JSON.parse(el.textContent);
  var cur = data.currency;
  var current = data.shown;
  var ref = data.points[data.reference];

  function $(id) { return document.getElementById(id); }
  function all(sel, root) { return Array.prototype.slice.call((root || document).querySelectorAll(sel)); }
  function fixed(v, d) {
    if (v === null || v === undefined || !isFinite(v)) { return "—"; }
    var t = Number(v).toLocaleString("en-US", {minimumFractionDigits: d, maximumFractionDigits: d});
    return (t === "-0" || /^-0\.0*$/.test(t)) ? t.slice(1) : t;
  }
  function money(v) { return fixed(Math.round(v), 0); }
  function h(v) { return v === null ? null : v / 100; }
  function setText(node, text) { if (node) { node.textContent = text; } }

  // --- the design shown --------------------------------------------------------------
  function dropOf(p, i) { return p.lf[i] !== null ? h(p.lf[i]) : h(p.est[i]); }

  function cards(p) {
    function card(key, value, sub) {
      var c = document.querySelector('[data-card="' + key + '"]');
      if (!c) { return; }
      setText(c.querySelector(".value"), value);
      if (sub !== undefined) { setText(c.querySelector(".sub"), sub); }
      return c;
    }
    card("capex", money(p.capex) + " " + cur);
    card("lifecycle", money(p.capex + p.losspv) + " " + cur);
    card("losses", money(p.kwh) + " kWh/yr", money(p.losscost) + " " + cur + " in the first year");
    var d = card("drop", fixed(p.worst, 2) + " %", (p.basis === "AC load flow" ? "AC load flow" : "linear estimate") + ", limit " + data.dropLimit + " %");
    if (d) { d.classList.toggle("warn", p.worst > data.dropLimit + 1e-9); }
    var f = card("findings", String(p.findings), !p.findings ? "none from the checks run" :
      (current === data.shown ? "see Verification" : "from this design's load flow and fault check"));
    if (f) { f.classList.toggle("warn", p.findings > 0); }
  }

  function flag(v, limit) {
    var text = fixed(v, 2);
    if (v !== null && limit !== null && v > limit + 1e-9) {
      var s = document.createElement("strong");
      s.className = "over";
      s.textContent = text;
      return s;
    }
    return document.createTextNode(text);
  }

  // A large tree's light page carries no per-run data: its tree and schedule summary
  // stay on the design the page was written for; the key figures still switch.
  var perRun = !!data.runs;

  function schedule(p) {
    if (!perRun) { return; }
    all("#schedule-table tbody tr").forEach(function (tr) {
      var i = Number(tr.getAttribute("data-i"));
      var run = data.runs[i];
      var a = run.alts[p.pick[i]];
      var changed = p.pick[i] !== ref.pick[i];
      tr.setAttribute("data-changed", changed ? "1" : "0");
      all("td[data-k]", tr).forEach(function (td) {
        var k = td.getAttribute("data-k");
        var node = null;
        if (k === "c") { node = document.createTextNode(a[0]); }
        else if (k === "e") { node = document.createTextNode(a[1]); }
        else if (k === "a") { node = document.createTextNode(fixed(a[2], 0)); }
        else if (k === "u") { node = document.createTextNode(fixed(a[7], 0)); }
        else if (k === "v") { node = flag(a[3], run.lim[0]); }
        else if (k === "p") { node = flag(h(p.est[i]), run.lim[1]); }
        else if (k === "l") { node = flag(h(p.lf[i]), run.lim[1]); }
        else if (k === "f") { node = document.createTextNode(fixed(h(p.fk[i]), 1)); }
        else if (k === "g") {
          var ef = p.ef ? p.ef[i] : null;
          var text = ef === null || run.trip === null ? "" : money(ef) + " / " + money(run.trip);
          if (ef !== null && run.trip !== null && ef < run.trip) {
            node = document.createElement("strong");
            node.className = "over";
            node.textContent = text;
          } else { node = document.createTextNode(text); }
        }
        else if (k === "x") { node = document.createTextNode(money(a[4])); }
        else if (k === "w") { node = document.createTextNode(fixed(a[5], 2)); }
        else if (k === "q") { node = document.createTextNode(money(a[6])); }
        else if (k === "n") {   // as landing_text in html.py
          node = document.createTextNode(a[9] === "reducing splice"
            ? (a[8] ? "splice to " + a[8] : "splice") : a[9]);
        }
        else if (k === "r") { node = document.createTextNode(a[10]); }
        if (node) { td.textContent = ""; td.appendChild(node); }
        td.classList.toggle("changed", k === "c" && changed);
      });
    });
    setText($("schedule-totals"), "Totals: upfront " + money(p.capex) + " " + cur + ", loss PV " +
      money(p.losspv) + " " + cur + ", " + money(p.kwh) + " kWh lost in the first year.");
    filter();
  }

  function tree(p) {
    if (!perRun) { return; }
    var up = {}, bind = {};
    p.up.forEach(function (i) { up[i] = true; });
    p.bind.forEach(function (i) { bind[i] = true; });
    all("svg.tree [data-i]").forEach(function (n) {
      var i = Number(n.getAttribute("data-i"));
      var cls = n.getAttribute("class") || "";
      var base = cls.split(" ")[0];
      if (base === "run") {
        n.setAttribute("class", "run" + (up[i] ? " up" : "") + (bind[i] ? " bind" : ""));
      } else if (base === "c") {
        n.textContent = data.runs[i].alts[p.pick[i]][0] + (up[i] ? " ↑" : "");
        n.setAttribute("class", "c" + (up[i] ? " up" : ""));
      } else if (base === "d") {
        var v = dropOf(p, i);
        n.textContent = (v === null ? "—" : fixed(v, 2) + " %") + (bind[i] ? " at limit" : "");
        n.setAttribute("class", "d" + (bind[i] ? " bind" : ""));
      }
    });
    all("svg.tree [data-runs]").forEach(function (n) {
      var runs = n.getAttribute("data-runs").split(" ").map(Number);
      var worst = null, count = 0;
      runs.forEach(function (i) {
        var v = dropOf(p, i);
        if (v !== null && (worst === null || v > worst)) { worst = v; }
        if (up[i]) { count += 1; }
      });
      if ((n.getAttribute("class") || "").split(" ")[0] === "c") {
        n.textContent = count ? count + " upsized ↑" : "none upsized";
      } else {
        n.textContent = "worst " + (worst === null ? "—" : fixed(worst, 2) + " %");
      }
    });
    all("#tree-basis .basis").forEach(function (n) { n.textContent = p.basis; });
  }

  function difference(p, index) {
    var words;
    if (index === data.reference) {
      words = "Showing " + p.label + ": this is the lifecycle optimum, the design the rest of the report describes.";
    } else {
      var changed = 0;
      if (perRun) {
        p.pick.forEach(function (k, i) { if (k !== ref.pick[i]) { changed += 1; } });
      } else { changed = p.changed; }
      var added = p.capex - ref.capex;
      var saved = ref.losspv - p.losspv;
      var kwh = ref.kwh - p.kwh;
      var life = (p.capex + p.losspv) - (ref.capex + ref.losspv);
      words = "Showing " + p.label + ". Against the lifecycle optimum: " + changed + " run" + (changed === 1 ? "" : "s") + " changed; " +
        (added >= 0 ? "costs " + money(added) + " " + cur + " more" : "costs " + money(-added) + " " + cur + " less") + " upfront; " +
        (saved >= 0 ? "saves " + money(saved) + " " + cur + " of losses (present value, " + money(kwh) + " kWh in the first year)"
                    : "loses " + money(-saved) + " " + cur + " more (present value, " + money(-kwh) + " kWh more in the first year)") +
        "; over the life it costs " + money(life) + " " + cur + " more in today's money.";
    }
    var cm = data.codeMinimum === null ? null : data.points[data.codeMinimum];
    if (cm && index !== data.codeMinimum) {
      var extra = p.capex - cm.capex;
      var firstYear = cm.losscost - p.losscost;
      if (extra > 0.5) {
        words += firstYear > 0 ? " Against the code minimum it pays back in " + fixed(extra / firstYear, 1) +
          " years (simple payback: added cost over the first year's saving)." : " Against the code minimum it never pays back.";
      }
    }
    words += perRun ? " Drops shown: " + p.basis + "." : " Key figures of this design; the tree and the schedule summary show " + data.points[data.shown].label + ".";
    setText($("explore-diff"), words);
    var showing = $("showing");
    if (showing) {
      showing.textContent = "";
      showing.appendChild(document.createTextNode("Showing: "));
      var s = document.createElement("strong");
      s.textContent = p.label;
      showing.appendChild(s);
      if (index !== data.shown) {
        showing.appendChild(document.createTextNode(" (the sections after the schedule describe " +
          data.points[data.shown].label + ")"));
      }
    }
  }

  function show(index) {
    index = Math.max(0, Math.min(data.points.length - 1, index));
    var p = data.points[index];
    current = index;
    cards(p);  // reads current
    schedule(p);
    tree(p);
    difference(p, index);
    all("#frontier-chart .pick").forEach(function (g) {
      g.classList.toggle("on", Number(g.getAttribute("data-p")) === index);
    });
    var slider = $("frontier-slider");
    if (slider) { slider.value = String(index); }
    document.body.setAttribute("data-shown", String(index));
  }

  // --- sorting and filtering the schedule ----------------------------------------------
  var sortCol = -1, sortDir = 1;
  function key(td) {
    var t = td.textContent.trim();
    var n = parseFloat(t.replace(/,/g, ""));
    return isNaN(n) ? t.toLowerCase() : n;
  }
  function sortBy(col) {
    var body = document.querySelector("#schedule-table tbody");
    var ths = all("#schedule-table thead th");
    sortDir = col === sortCol ? -sortDir : 1;
    sortCol = col;
    ths.forEach(function (th, j) {
      if (j === col) { th.setAttribute("aria-sort", sortDir > 0 ? "ascending" : "descending"); }
      else { th.removeAttribute("aria-sort"); }
    });
    var numeric = ths[col].classList.contains("num");
    var rows = all("tr", body);
    rows.sort(function (a, b) {
      var x = key(a.children[col]), y = key(b.children[col]);
      if (numeric) {
        if (typeof x !== "number") { x = -Infinity; }
        if (typeof y !== "number") { y = -Infinity; }
      } else { x = String(x); y = String(y); }
      if (x < y) { return -sortDir; }
      if (x > y) { return sortDir; }
      return Number(a.getAttribute("data-i")) - Number(b.getAttribute("data-i"));
    });
    rows.forEach(function (r) { body.appendChild(r); });
  }
  function filter() {
    var panel = $("f-panel") ? $("f-panel").value : "";
    var text = $("f-text") ? $("f-text").value.trim().toLowerCase() : "";
    var drop = $("f-drop") ? parseFloat($("f-drop").value) : NaN;
    var changedOnly = $("f-changed") ? $("f-changed").checked : false;
    var p = data.points[current];
    var shownRows = 0, total = 0;
    all("#schedule-table tbody tr").forEach(function (tr) {
      var i = Number(tr.getAttribute("data-i"));
      total += 1;
      var ok = (!panel || tr.getAttribute("data-panel") === panel) &&
        (!text || tr.children[1].textContent.toLowerCase().indexOf(text) >= 0) &&
        (isNaN(drop) || (dropOf(p, i) !== null && dropOf(p, i) >= drop)) &&
        (!changedOnly || tr.getAttribute("data-changed") === "1");
      tr.hidden = !ok;
      if (ok) { shownRows += 1; }
    });
    setText($("f-count"), shownRows === total ? total + " runs" : shownRows + " of " + total + " runs");
  }

  // --- wiring ---------------------------------------------------------------------------
  all("#frontier-chart .pick").forEach(function (g) {
    var i = Number(g.getAttribute("data-p"));
    g.addEventListener("click", function () { show(i); });
    g.addEventListener("keydown", function (e) {
      if (e.key === "Enter" || e.key === " ") { e.preventDefault(); show(i); }
    });
  });
  var slider = $("frontier-slider");
  if (slider) { slider.addEventListener("input", function () { show(Number(slider.value)); }); }
  var best = $("show-optimum");
  if (best) { best.addEventListener("click", function () { show(data.reference); }); }
  all("#schedule-table thead th").forEach(function (th, j) {
    th.setAttribute("tabindex", "0");
    th.addEventListener("click", function () { sortBy(j); });
    th.addEventListener("keydown", function (e) { if (e.key === "Enter") { sortBy(j); } });
  });
  ["f-panel", "f-text", "f-drop", "f-changed"].forEach(function (id) {
    var c = $(id);
    if (c) { c.addEventListener("input", filter); c.addEventListener("change", filter); }
  });
  all("svg.tree a.open").forEach(function (a) {
    a.addEventListener("click", function () {
      var d = $(a.getAttribute("data-open"));
      if (d) { d.open = true; }
    });
  });
  window.addEventListener("beforeprint", function () {
    all("details.tree-detail").forEach(function (d) { d.open = true; });
  });
  ["explore-controls", "schedule-controls", "showing"].forEach(function (id) {
    var c = $(id);
    if (c) { c.hidden = false; }
  });
  if (perRun) {
    all("#schedule-table tbody tr").forEach(function (tr) {
      var i = Number(tr.getAttribute("data-i"));
      tr.setAttribute("data-changed", data.points[current].pick[i] !== ref.pick[i] ? "1" : "0");
    });
  }
  filter();
  window.sizerReport = {show: show, data: data, current: function () { return current; }};
}());

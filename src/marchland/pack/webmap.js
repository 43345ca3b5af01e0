(function () {
  "use strict";
  var D = JSON.parse(document.getElementById("ml-data").textContent);
  var svg = document.getElementById("ml-svg");
  var paths = svg.querySelectorAll("#ml-units path");
  var byIndex = [];
  for (var k = 0; k < paths.length; k++) byIndex[+paths[k].getAttribute("data-i")] = paths[k];
  var tip = document.getElementById("ml-tip");
  var info = document.getElementById("ml-info");
  var legendBox = document.getElementById("ml-legend");
  var q = document.getElementById("ml-q");
  var hits = document.getElementById("ml-hits");
  var sel = document.getElementById("ml-sel");
  var home = svg.getAttribute("viewBox");
  var current = 0;
  var chosen = -1;

  function el(tag, text) {
    var e = document.createElement(tag);
    if (text !== undefined) e.textContent = text;
    return e;
  }
  function paint(key) {
    if (key.slice(-2) === "|h") return "url(#ml-h" + D.hatch.indexOf(key) + ")";
    return key;
  }
  function swatch(key) {
    var ns = svg.namespaceURI;
    var s = document.createElementNS(ns, "svg");
    s.setAttribute("width", "16"); s.setAttribute("height", "12");
    s.setAttribute("viewBox", "0 0 60 45");
    var r = document.createElementNS(ns, "rect");
    r.setAttribute("width", "60"); r.setAttribute("height", "45");
    r.setAttribute("fill", paint(key));
    s.appendChild(r);
    return s;
  }
  function showLayer(n) {
    current = n;
    var L = D.layers[n];
    if (!L) return;
    var fills = L.palette.map(paint);
    for (var i = 0; i < L.cls.length; i++) {
      if (byIndex[i]) byIndex[i].setAttribute("fill", fills[L.cls[i]]);
    }
    legendBox.textContent = "";
    legendBox.appendChild(el("h3", L.title));
    L.legend.forEach(function (row) {
      var d = el("div"); d.className = "ml-key";
      d.appendChild(swatch(row[1])); d.appendChild(el("span", row[0]));
      legendBox.appendChild(d);
    });
    if (chosen >= 0) showUnit(chosen);
  }
  function sparkline(values) {
    var ns = svg.namespaceURI, w = 260, h = 70, n = values.length;
    var s = document.createElementNS(ns, "svg");
    s.setAttribute("viewBox", "0 0 " + w + " " + h);
    s.setAttribute("class", "ml-spark");
    s.setAttribute("role", "img");
    var max = 1;
    values.forEach(function (v) { if (v > max) max = v; });
    var bw = w / Math.max(n, 1);
    values.forEach(function (v, i) {
      var r = document.createElementNS(ns, "rect");
      var x = (i * bw + 0.5).toFixed(1);
      if (v < 0) {  // not reported: a short grey tick, never a zero bar
        r.setAttribute("x", x); r.setAttribute("y", h - 4);
        r.setAttribute("width", Math.max(bw - 1, 1).toFixed(1)); r.setAttribute("height", 2);
        r.setAttribute("fill", "#c9c4b8");
      } else {
        var bh = (h - 14) * v / max;
        r.setAttribute("x", x); r.setAttribute("y", (h - 2 - bh).toFixed(1));
        r.setAttribute("width", Math.max(bw - 1, 1).toFixed(1));
        r.setAttribute("height", bh.toFixed(1)); r.setAttribute("fill", "#6d7fa8");
      }
      s.appendChild(r);
    });
    var t = document.createElementNS(ns, "text");
    t.setAttribute("x", 2); t.setAttribute("y", 10); t.setAttribute("font-size", 9);
    t.textContent = "max " + max + " cases a week";
    s.appendChild(t);
    return s;
  }
  function showUnit(i) {
    chosen = i;
    var p = byIndex[i];
    sel.setAttribute("d", p ? p.getAttribute("d") : "");
    info.textContent = "";
    var h = el("h3", D.name[i]);
    info.appendChild(h);
    info.appendChild(el("div", D.id[i] + " \u00b7 " + D.country[i]));
    var tb = el("table"), body = el("tbody");
    D.layers.forEach(function (L, n) {
      var tr = el("tr");
      var th = el("th", L.title); if (n === current) th.style.fontWeight = "bold";
      tr.appendChild(th); tr.appendChild(el("td", L.text[i])); body.appendChild(tr);
    });
    D.facts.forEach(function (f, n) {
      var tr = el("tr");
      tr.appendChild(el("th", f)); tr.appendChild(el("td", D.factValues[n][i]));
      body.appendChild(tr);
    });
    tb.appendChild(body); info.appendChild(tb);
    if (D.weeks.length) {
      info.appendChild(el("h3", "Weekly cases, " + D.weeks[0] + " to " + D.weeks[D.weeks.length - 1]));
      info.appendChild(sparkline(D.epi[i]));
      info.appendChild(el("p", "Grey ticks: no report that week (not a zero)."));
    }
    info.setAttribute("data-unit", D.id[i]);
  }
  function unitOf(target) {
    var a = target && target.getAttribute && target.getAttribute("data-i");
    return a === null || a === undefined ? -1 : +a;
  }
  svg.addEventListener("mousemove", function (ev) {
    var i = unitOf(ev.target);
    if (i < 0) { tip.hidden = true; return; }
    var box = svg.parentNode.getBoundingClientRect();
    tip.textContent = "";
    tip.appendChild(el("b", D.name[i]));
    tip.appendChild(el("div", D.layers.length ? D.layers[current].text[i] : ""));
    tip.setAttribute("data-unit", D.id[i]);
    tip.hidden = false;
    tip.style.left = Math.min(ev.clientX - box.left + 12, box.width - 150) + "px";
    tip.style.top = (ev.clientY - box.top + 12) + "px";
  });
  svg.addEventListener("mouseleave", function () { tip.hidden = true; });
  svg.addEventListener("click", function (ev) {
    var i = unitOf(ev.target);
    if (i >= 0) showUnit(i);
  });
  document.querySelectorAll('input[name="ml-layer"]').forEach(function (r) {
    r.addEventListener("change", function () { showLayer(+r.value); });
  });
  // Search: every name a unit is known by, lower-cased and stripped of accents once.
  function norm(s) {
    return s.normalize("NFD").replace(/[\u0300-\u036f]/g, "").toLowerCase();
  }
  var keys = D.find.map(function (f, i) { return norm(f + "|" + D.name[i]); });
  function zoomTo(i) {
    var p = byIndex[i];
    if (!p) return;
    var b = p.getBBox(), m = Math.max(b.width, b.height) * 2 + 200;
    svg.setAttribute("viewBox", [b.x + b.width / 2 - m, b.y + b.height / 2 - m, 2 * m, 2 * m].join(" "));
  }
  function choose(i) {
    hits.textContent = "";
    q.value = D.name[i];
    showUnit(i);
    zoomTo(i);
  }
  function search() {
    var t = norm(q.value.trim());
    hits.textContent = "";
    if (t.length < 2) return [];
    var found = [];
    for (var i = 0; i < keys.length && found.length < 12; i++) {
      if (keys[i].indexOf(t) >= 0) found.push(i);
    }
    found.forEach(function (i) {
      var li = el("li", D.name[i] + " ");
      var names = D.find[i].split("|").filter(function (n) { return norm(n).indexOf(t) >= 0; });
      li.appendChild(el("small", D.country[i] + (names.length && names[0] !== D.name[i] ? " \u00b7 as " + names[0] : "")));
      li.setAttribute("data-i", i);
      li.addEventListener("click", function () { choose(i); });
      hits.appendChild(li);
    });
    return found;
  }
  q.addEventListener("input", search);
  q.form.addEventListener("submit", function (ev) {
    ev.preventDefault();
    var found = search();
    if (found.length) choose(found[0]);
  });
  document.getElementById("ml-reset").addEventListener("click", function () {
    svg.setAttribute("viewBox", home);
  });
  showLayer(0);
})();

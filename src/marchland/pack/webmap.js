(function () {
  "use strict";
  var D = JSON.parse(document.getElementById("ml-data").textContent);
  var svg = document.getElementById("ml-svg");
  // The k-th path is the k-th unit.
  var byIndex = Array.prototype.slice.call(svg.querySelectorAll("#ml-units path"));
  var indexOf = new Map();
  byIndex.forEach(function (p, k) { indexOf.set(p, k); });
  var N = D.id.length;
  // Codes written one character each (or a plain list when there are many).
  var ALPHA = "0123456789abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ";
  function uncodes(c) {
    if (typeof c !== "string") return c;
    var out = new Array(c.length);
    for (var i = 0; i < c.length; i++) out[i] = ALPHA.indexOf(c.charAt(i));
    return out;
  }
  // A number stored as an integer scaled by its decimals, written as the report writes it.
  function num(n, dec, comma) {
    if (n === null || n === undefined) return "\u2013";
    var s = String(Math.abs(n));
    while (s.length <= dec) s = "0" + s;
    var whole = s.slice(0, s.length - dec), frac = s.slice(s.length - dec);
    if (comma) whole = whole.replace(/\B(?=(\d{3})+(?!\d))/g, ",");
    return (n < 0 ? "-" : "") + whole + (dec ? "." + frac : "");
  }
  // Per-unit texts: a template per unit ({k}: the k-th number), numbers for the units whose
  // template has a slot, in unit order.
  var SLOT = /\{\{|\}\}|\{(\d+)\}/g;
  function texts(T) {
    var which = T.w === undefined ? null : uncodes(T.w), f = T.f || [];
    var slots = T.t.map(function (t) { return /\{\d+\}/.test(t.replace(/\{\{|\}\}/g, "")); });
    var row = new Array(N), r = 0;
    for (var i = 0; i < N; i++) row[i] = slots[which ? which[i] : 0] ? r++ : -1;
    return function (i) {
      return T.t[which ? which[i] : 0].replace(SLOT, function (m, k) {
        if (k === undefined) return m.charAt(0);
        return num(f[+k][2][row[i]], f[+k][0], f[+k][1]);
      });
    };
  }
  D.layers.forEach(function (L) { L.cls = uncodes(L.cls); L.say = texts(L.text); });
  var facts = D.factValues.map(texts);
  var country = uncodes(D.country).map(function (c) { return D.countries[c]; });
  // Every name a unit is known by: its id, its name, then the others (aliases, report spellings).
  var find = D.id.map(function (id, i) {
    var names = [id];
    if (D.name[i] && D.name[i] !== id) names.push(D.name[i]);
    return names.concat(D.find[i] ? D.find[i].split("|") : []);
  });
  // Weekly cases: units split by ";", weeks by ","; "" is 0, "x" not reported, trailing zeros cut.
  var epiRows = D.epi.split(";");
  function epi(i) {
    var t = epiRows[i] ? epiRows[i].split(",") : [], out = [];
    for (var w = 0; w < D.weeks.length; w++) {
      var v = t[w];
      out.push(v === "x" ? -1 : v ? +v : 0);
    }
    return out;
  }
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
    sel.setAttribute("d", (p && p.getAttribute("d")) || "");
    info.textContent = "";
    var h = el("h3", D.name[i]);
    info.appendChild(h);
    info.appendChild(el("div", D.id[i] + " \u00b7 " + country[i]));
    var tb = el("table"), body = el("tbody");
    D.layers.forEach(function (L, n) {
      var tr = el("tr");
      var th = el("th", L.title); if (n === current) th.style.fontWeight = "bold";
      tr.appendChild(th); tr.appendChild(el("td", L.say(i))); body.appendChild(tr);
    });
    D.facts.forEach(function (f, n) {
      var tr = el("tr");
      tr.appendChild(el("th", f)); tr.appendChild(el("td", facts[n](i)));
      body.appendChild(tr);
    });
    tb.appendChild(body); info.appendChild(tb);
    if (D.weeks.length) {
      info.appendChild(el("h3", "Weekly cases, " + D.weeks[0] + " to " + D.weeks[D.weeks.length - 1]));
      info.appendChild(sparkline(epi(i)));
      info.appendChild(el("p", "Grey ticks: no report that week (not a zero)."));
    }
    info.setAttribute("data-unit", D.id[i]);
  }
  function unitOf(target) {
    var k = indexOf.get(target);
    return k === undefined ? -1 : k;
  }
  svg.addEventListener("mousemove", function (ev) {
    var i = unitOf(ev.target);
    if (i < 0) { tip.hidden = true; return; }
    var box = svg.parentNode.getBoundingClientRect();
    tip.textContent = "";
    tip.appendChild(el("b", D.name[i]));
    tip.appendChild(el("div", D.layers.length ? D.layers[current].say(i) : ""));
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
  var keys = find.map(function (f, i) { return norm(f.join("|") + "|" + D.name[i]); });
  function zoomTo(i) {
    var p = byIndex[i];
    if (!p || !p.getAttribute("d")) return;
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
      var names = find[i].filter(function (n) { return norm(n).indexOf(t) >= 0; });
      li.appendChild(el("small", country[i] + (names.length && names[0] !== D.name[i] ? " \u00b7 as " + names[0] : "")));
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

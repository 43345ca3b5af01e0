// Run the map's script (webmap.js) in Node.js against a minimal document and print, as JSON,
// what the page shows: the hover text of every unit in every layer, the click panel of every
// unit (its table rows and epi-curve bars) and the search hits for a query.
// Usage: node webmap_dom.js SCRIPT DATA_JSON QUERY   (used by tests/test_webmap_data.py)
"use strict";
const fs = require("fs");
const [scriptPath, dataPath, query] = process.argv.slice(2);
const payload = fs.readFileSync(dataPath, "utf8");
const D = JSON.parse(payload);
const N = D.id.length;

class El {
  constructor(tag) {
    this.tag = tag; this.children = []; this.attrs = {}; this.listeners = {};
    this.text = ""; this.style = {}; this.hidden = false; this.value = "";
    this.namespaceURI = "http://www.w3.org/2000/svg";
  }
  appendChild(c) { this.children.push(c); c.parentNode = this; return c; }
  get textContent() { return this.text + this.children.map((c) => c.textContent).join(""); }
  set textContent(v) { this.text = String(v); this.children = []; }
  setAttribute(k, v) { this.attrs[k] = String(v); }
  getAttribute(k) { return k in this.attrs ? this.attrs[k] : null; }
  addEventListener(t, f) { (this.listeners[t] = this.listeners[t] || []).push(f); }
  fire(t, ev) {
    (this.listeners[t] || []).forEach((f) => f(Object.assign({ preventDefault() {} }, ev)));
  }
  getBoundingClientRect() { return { left: 0, top: 0, width: 1000, height: 1000 }; }
  getBBox() { return { x: 0, y: 0, width: 10, height: 10 }; }
}

const byId = {};
["ml-data", "ml-svg", "ml-tip", "ml-info", "ml-legend", "ml-q", "ml-hits", "ml-sel", "ml-reset"]
  .forEach((id) => { byId[id] = new El(id); });
byId["ml-data"].text = payload;
byId["ml-svg"].attrs.viewBox = "0 0 10 10";
new El("div").appendChild(byId["ml-svg"]);
byId["ml-q"].form = new El("form");
const paths = D.id.map(() => new El("path"));
// data-i: what the previous script read (this one counts the paths).
paths.forEach((p, i) => { p.attrs.d = "M0 0l1 1z"; p.attrs["data-i"] = String(i); });
byId["ml-svg"].querySelectorAll = () => paths;
const radios = D.layers.map((_, k) => Object.assign(new El("input"), { value: String(k) }));
global.document = {
  getElementById: (id) => byId[id],
  querySelectorAll: () => radios,
  createElement: (tag) => new El(tag),
  createElementNS: (ns, tag) => new El(tag),
};
// The page's own script, as inlined in the report.
new Function(fs.readFileSync(scriptPath, "utf8"))();

const tip = byId["ml-tip"], info = byId["ml-info"], svg = byId["ml-svg"];
const out = { tips: [], panels: [], hits: [], found: null };
D.layers.forEach((_, k) => {
  radios[k].fire("change");
  out.tips.push(paths.map((p) => {
    svg.fire("mousemove", { target: p, clientX: 5, clientY: 5 });
    return tip.hidden ? null : tip.children.map((c) => c.textContent);
  }));
});
radios[0].fire("change");
for (let i = 0; i < N; i++) {
  svg.fire("click", { target: paths[i] });
  out.panels.push(info.children.map((c) => {
    if (c.tag === "table") {
      return c.children[0].children.map((tr) => tr.children.map((td) => td.textContent));
    }
    if (c.tag === "svg") {
      return c.children.map((r) => r.tag === "rect" ? [r.attrs.fill, +r.attrs.height] : r.textContent);
    }
    return c.textContent;
  }));
}
const q = byId["ml-q"];
q.value = query;
q.fire("input");
out.hits = byId["ml-hits"].children.map((li) => li.textContent);
q.form.fire("submit");
out.found = info.getAttribute("data-unit");
process.stdout.write(JSON.stringify(out));

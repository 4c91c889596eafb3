/* qualplan log-log plots: our own small SVG drawing, no library, works offline.
 * Each <figure class="plot" data-plot=ID> holds its data as JSON in #data-ID:
 * {title, xlabel, xunit, ylabel, yunit, ylog, series: [{name, x, y, style, role}]}.
 * Hover (or focus and the arrow keys) reads the frequency and the value of every
 * series at that frequency, interpolated as the curves are drawn (straight lines in
 * log-log, or log-x / linear-y for dB ratios).
 */
(function () {
  "use strict";
  var NS = "http://www.w3.org/2000/svg";
  var COLOURS = ["#12436d", "#b3520b", "#1e7b5b", "#6a3d9a", "#8a1c2b"];
  var BAND = "#5a5a5a";
  var SUP = { "-": "⁻", "0": "⁰", "1": "¹", "2": "²", "3": "³", "4": "⁴", "5": "⁵",
              "6": "⁶", "7": "⁷", "8": "⁸", "9": "⁹" };

  function el(name, attrs, parent) {
    var node = document.createElementNS(NS, name);
    for (var k in attrs) { node.setAttribute(k, attrs[k]); }
    if (parent) { parent.appendChild(node); }
    return node;
  }

  function decadeLabel(k) {
    if (k >= -2 && k <= 4) { return String(Math.pow(10, k).toFixed(Math.max(0, -k))); }
    return "10" + String(k).split("").map(function (c) { return SUP[c]; }).join("");
  }

  function fmt(v) {
    if (v === null || !isFinite(v)) { return "–"; }
    var a = Math.abs(v);
    if (a !== 0 && (a < 1e-3 || a >= 1e5)) { return v.toExponential(3); }
    return Number(v.toPrecision(4)).toString();
  }

  function niceStep(span) {
    var raw = span / 6, p = Math.pow(10, Math.floor(Math.log10(raw))), m = raw / p;
    return p * (m < 1.5 ? 1 : m < 3.5 ? 2 : m < 7.5 ? 5 : 10);
  }

  /* value of a series at frequency f (null outside its range) */
  function valueAt(s, f, ylog) {
    var x = s.x, y = s.y;
    if (!x.length || f < x[0] || f > x[x.length - 1]) { return null; }
    for (var i = 1; i < x.length; i++) {
      if (f <= x[i]) {
        var y0 = y[i - 1], y1 = y[i];
        if (y0 === null || y1 === null) { return null; }
        if (x[i] === x[i - 1]) { return y1; }
        var t = (Math.log(f) - Math.log(x[i - 1])) / (Math.log(x[i]) - Math.log(x[i - 1]));
        if (ylog) {
          if (y0 <= 0 || y1 <= 0) { return y0 + t * (y1 - y0); }
          return Math.exp(Math.log(y0) + t * (Math.log(y1) - Math.log(y0)));
        }
        return y0 + t * (y1 - y0);
      }
    }
    return y[0];
  }

  function draw(fig) {
    var id = fig.getAttribute("data-plot");
    var data = JSON.parse(document.getElementById("data-" + id).textContent);
    var box = document.getElementById("plot-" + id);
    var readout = document.getElementById("readout-" + id);
    var W = Math.max(320, Math.min(900, box.clientWidth || 800)), H = 380;
    var L = 78, R = 18, T = 14, B = 48, pw = W - L - R, ph = H - T - B;
    var xs = [], ys = [];
    data.series.forEach(function (s) {
      s.x.forEach(function (v, i) {
        if (v > 0) { xs.push(v); }
        var w = s.y[i];
        if (w !== null && (data.ylog ? w > 0 : isFinite(w))) { ys.push(w); }
      });
    });
    if (!xs.length || !ys.length) { box.textContent = "No data to plot."; return; }
    var x0 = Math.floor(Math.log10(Math.min.apply(null, xs)) + 1e-9);
    var x1 = Math.ceil(Math.log10(Math.max.apply(null, xs)) - 1e-9);
    if (x1 <= x0) { x1 = x0 + 1; }
    var y0, y1, yticks = [];
    if (data.ylog) {
      y1 = Math.ceil(Math.log10(Math.max.apply(null, ys)) - 1e-9);
      y0 = Math.floor(Math.log10(Math.min.apply(null, ys)) + 1e-9);
      if (y1 - y0 > 8) { y0 = y1 - 8; }
      if (y1 <= y0) { y1 = y0 + 1; }
    } else {
      var lo = Math.min.apply(null, ys), hi = Math.max.apply(null, ys);
      if (hi - lo < 1e-9) { lo -= 1; hi += 1; }
      var st = niceStep(hi - lo);
      y0 = Math.floor(lo / st) * st; y1 = Math.ceil(hi / st) * st;
      /* keep reference lines (0 dB, limits) off the frame */
      if (lo - y0 < st * 0.05) { y0 -= st; }
      if (y1 - hi < st * 0.05) { y1 += st; }
      for (var v = y0; v <= y1 + st / 2; v += st) { yticks.push(v); }
    }
    function px(f) { return L + (Math.log10(f) - x0) / (x1 - x0) * pw; }
    function py(v) {
      if (data.ylog) {
        var lv = v > 0 ? Math.log10(v) : y0 - 1;
        return T + ph - (lv - y0) / (y1 - y0) * ph;
      }
      return T + ph - (v - y0) / (y1 - y0) * ph;
    }
    function fx(X) { return Math.pow(10, x0 + (X - L) / pw * (x1 - x0)); }

    var svg = el("svg", { viewBox: "0 0 " + W + " " + H, width: "100%", "class": "plot-svg",
                          "aria-hidden": "true", focusable: "false" });
    el("rect", { x: L, y: T, width: pw, height: ph, "class": "frame" }, svg);
    var grid = el("g", { "class": "grid" }, svg);
    for (var k = x0; k <= x1; k++) {
      el("line", { x1: px(Math.pow(10, k)), x2: px(Math.pow(10, k)), y1: T, y2: T + ph,
                   "class": "major" }, grid);
      var t = el("text", { x: px(Math.pow(10, k)), y: T + ph + 18, "class": "tick",
                           "text-anchor": "middle" }, svg);
      t.textContent = decadeLabel(k);
      if (k < x1) {
        for (var m = 2; m < 10; m++) {
          el("line", { x1: px(m * Math.pow(10, k)), x2: px(m * Math.pow(10, k)), y1: T,
                       y2: T + ph, "class": "minor" }, grid);
          if (x1 - x0 <= 2 && (m === 2 || m === 5)) {
            var tm = el("text", { x: px(m * Math.pow(10, k)), y: T + ph + 18,
                                  "class": "tick minor-tick", "text-anchor": "middle" }, svg);
            tm.textContent = fmt(m * Math.pow(10, k));
          }
        }
      }
    }
    if (data.ylog) {
      for (k = y0; k <= y1; k++) {
        var yy = py(Math.pow(10, k));
        el("line", { x1: L, x2: L + pw, y1: yy, y2: yy, "class": "major" }, grid);
        var ty = el("text", { x: L - 8, y: yy + 4, "class": "tick", "text-anchor": "end" }, svg);
        ty.textContent = decadeLabel(k);
        if (k < y1 && y1 - y0 <= 5) {
          for (m = 2; m < 10; m++) {
            var ym = py(m * Math.pow(10, k));
            el("line", { x1: L, x2: L + pw, y1: ym, y2: ym, "class": "minor" }, grid);
            if (y1 - y0 <= 2 && (m === 2 || m === 5)) {
              var tym = el("text", { x: L - 8, y: ym + 4, "class": "tick minor-tick",
                                     "text-anchor": "end" }, svg);
              tym.textContent = fmt(m * Math.pow(10, k));
            }
          }
        }
      }
    } else {
      yticks.forEach(function (v) {
        el("line", { x1: L, x2: L + pw, y1: py(v), y2: py(v),
                     "class": Math.abs(v) < 1e-9 ? "zero" : "major" }, grid);
        var tl = el("text", { x: L - 8, y: py(v) + 4, "class": "tick", "text-anchor": "end" }, svg);
        tl.textContent = fmt(v);
      });
    }
    var xl = el("text", { x: L + pw / 2, y: H - 8, "class": "axis-label", "text-anchor": "middle" }, svg);
    xl.textContent = data.xlabel + " [" + data.xunit + "]";
    var yl = el("text", { x: 16, y: T + ph / 2, "class": "axis-label", "text-anchor": "middle",
                          transform: "rotate(-90 16 " + (T + ph / 2) + ")" }, svg);
    yl.textContent = data.ylabel + " [" + data.yunit + "]";

    var clip = "clip-" + id;
    var defs = el("defs", {}, svg);
    var cp = el("clipPath", { id: clip }, defs);
    el("rect", { x: L, y: T, width: pw, height: ph }, cp);
    var curves = el("g", { "clip-path": "url(#" + clip + ")" }, svg);
    var legend = document.createElement("ul");
    legend.className = "legend";
    var colourIndex = 0;
    data.series.forEach(function (s) {
      var colour = s.role === "band" ? BAND : COLOURS[colourIndex++ % COLOURS.length];
      s.colour = colour;
      var d = "", pen = false;
      for (var i = 0; i < s.x.length; i++) {
        var v = s.y[i];
        if (v === null || !(s.x[i] > 0) || (data.ylog && !(v > 0))) { pen = false; continue; }
        d += (pen ? "L" : "M") + px(s.x[i]).toFixed(1) + "," + py(v).toFixed(1);
        pen = true;
      }
      var cls = "curve " + (s.style || "solid") + (s.role === "main" ? " main" : "");
      el("path", { d: d, stroke: colour, "class": cls }, curves);
      var li = document.createElement("li");
      var sw = document.createElement("span");
      sw.className = "swatch " + (s.style || "solid");
      sw.setAttribute("data-colour", colour);
      sw.style.borderTopColor = colour;
      li.appendChild(sw);
      li.appendChild(document.createTextNode(s.name));
      legend.appendChild(li);
    });

    var cursor = el("g", { "class": "cursor", visibility: "hidden" }, svg);
    var vline = el("line", { y1: T, y2: T + ph, "class": "crosshair" }, cursor);
    var dot = el("circle", { r: 4, "class": "marker" }, cursor);
    var tipBg = el("rect", { "class": "tip-bg", rx: 3, height: 22 }, cursor);
    var tip = el("text", { "class": "tip" }, cursor);
    var main = data.series.filter(function (s) { return s.role === "main"; })[0] || data.series[0];
    var xsMain = main.x.filter(function (v) { return v > 0; });
    var keyIndex = -1;

    function show(f) {
      if (f < Math.pow(10, x0) || f > Math.pow(10, x1)) { return hide(); }
      var X = px(f);
      vline.setAttribute("x1", X); vline.setAttribute("x2", X);
      var vm = valueAt(main, f, data.ylog);
      var parts = [];
      data.series.forEach(function (s) {
        var v = valueAt(s, f, data.ylog);
        if (v !== null) { parts.push(s.name + ": " + fmt(v) + " " + data.yunit); }
      });
      var head = data.xlabel + " " + fmt(f) + " " + data.xunit;
      readout.textContent = head + " — " + (parts.length ? parts.join("; ") : "no value here");
      if (vm !== null) {
        dot.setAttribute("cx", X); dot.setAttribute("cy", py(vm));
        dot.setAttribute("visibility", "visible");
        tip.textContent = fmt(f) + " " + data.xunit + ", " + fmt(vm) + " " + data.yunit;
      } else {
        dot.setAttribute("visibility", "hidden");
        tip.textContent = fmt(f) + " " + data.xunit;
      }
      var w = tip.getComputedTextLength ? tip.getComputedTextLength() + 12 : 160;
      var tx = X + 10 + w > L + pw ? X - 10 - w : X + 10;
      var tyy = vm !== null ? Math.max(T + 4, Math.min(T + ph - 26, py(vm) - 30)) : T + 6;
      tipBg.setAttribute("x", tx); tipBg.setAttribute("y", tyy); tipBg.setAttribute("width", w);
      tip.setAttribute("x", tx + 6); tip.setAttribute("y", tyy + 15);
      cursor.setAttribute("visibility", "visible");
    }
    function hide() { cursor.setAttribute("visibility", "hidden"); }

    svg.addEventListener("mousemove", function (ev) {
      var r = svg.getBoundingClientRect();
      var X = (ev.clientX - r.left) * W / r.width;
      if (X < L || X > L + pw) { return hide(); }
      show(fx(X));
    });
    svg.addEventListener("mouseleave", hide);
    box.addEventListener("keydown", function (ev) {
      if (!xsMain.length) { return; }
      if (ev.key === "ArrowRight") { keyIndex = Math.min(xsMain.length - 1, keyIndex + 1); }
      else if (ev.key === "ArrowLeft") { keyIndex = Math.max(0, keyIndex < 0 ? 0 : keyIndex - 1); }
      else if (ev.key === "Home") { keyIndex = 0; }
      else if (ev.key === "End") { keyIndex = xsMain.length - 1; }
      else if (ev.key === "Escape") { hide(); return; }
      else { return; }
      ev.preventDefault();
      show(xsMain[keyIndex]);
    });
    box.innerHTML = "";
    box.appendChild(svg);
    box.appendChild(legend);
  }

  function init() {
    var figs = document.querySelectorAll("figure.plot[data-plot]");
    for (var i = 0; i < figs.length; i++) {
      try { draw(figs[i]); } catch (e) {
        figs[i].querySelector(".plot-area").textContent = "The plot could not be drawn: " + e;
      }
    }
    document.documentElement.setAttribute("data-plots-ready", String(figs.length));
  }
  if (document.readyState === "loading") { document.addEventListener("DOMContentLoaded", init); }
  else { init(); }
})();

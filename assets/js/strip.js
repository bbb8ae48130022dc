// ECG strip tools: zoom into a stretch of the strip and measure with a
// calliper, both on the paper's own scale. Loaded by pages that show a
// recording; wired from the data-* attributes of figure[data-strip-tools]
// (no inline script: the Content-Security-Policy is script-src 'self').
//
// The strip's SVG is drawn in millimetres of ECG paper (its viewBox), so a
// point's paper position is the pointer's position mapped through the SVG's
// screen matrix, whatever the magnification: time is millimetres across
// divided by the paper speed, voltage millimetres up divided by the gain.
(function () {
  "use strict";

  var NS = "http://www.w3.org/2000/svg";
  var STRETCH_MM = 50; // a zoomed stretch: 2 s of paper at 25 mm/s

  function num(el, name) { return parseFloat(el.getAttribute(name)); }

  function paperPoint(svg, ev) {
    var pt = svg.createSVGPoint();
    pt.x = ev.clientX; pt.y = ev.clientY;
    return pt.matrixTransform(svg.getScreenCTM().inverse());
  }

  function button(text, testid) {
    var b = document.createElement("button");
    b.type = "button";
    b.className = "quiet";
    b.textContent = text;
    b.setAttribute("data-testid", testid);
    return b;
  }

  function line(x1, y1, x2, y2, cls) {
    var l = document.createElementNS(NS, "line");
    l.setAttribute("x1", x1); l.setAttribute("y1", y1);
    l.setAttribute("x2", x2); l.setAttribute("y2", y2);
    l.setAttribute("class", cls);
    return l;
  }

  function wire(fig) {
    if (fig.getAttribute("data-wired")) return;
    fig.setAttribute("data-wired", "1");
    var svg = fig.querySelector("svg");
    if (!svg) return;
    var paper = {
      speed: num(fig, "data-speed"),       // mm per second
      gain: num(fig, "data-gain"),         // mm per millivolt
      rowH: num(fig, "data-row-height"),   // mm
      rowS: num(fig, "data-row-seconds"),  // seconds per row
      margin: num(fig, "data-margin"),     // mm before a row's first sample
      width: num(fig, "data-width")        // mm
    };
    var key = fig.getAttribute("data-testid") || "strip";
    var mode = "";
    var marks = [];

    var bar = document.createElement("div");
    bar.className = "strip-tools";
    bar.setAttribute("data-testid", "strip-tools");
    var zoomBtn = button("Zoom into a stretch", "strip-zoom");
    var factor = document.createElement("select");
    factor.setAttribute("aria-label", "Magnification of the zoomed stretch");
    factor.setAttribute("data-testid", "strip-zoom-factor");
    [2, 4, 8].forEach(function (f) {
      var o = document.createElement("option");
      o.value = String(f); o.textContent = "×" + f;
      factor.appendChild(o);
    });
    var calBtn = button("Calliper", "strip-calliper");
    var clearBtn = button("Clear", "strip-clear");
    var out = document.createElement("output");
    out.setAttribute("aria-live", "polite");
    out.setAttribute("data-testid", "calliper-reading");
    out.className = "hint";
    [zoomBtn, factor, calBtn, clearBtn, out].forEach(function (el) { bar.appendChild(el); });
    fig.insertBefore(bar, svg);

    var zoom = document.createElement("div");
    zoom.className = "strip-zoom";
    zoom.hidden = true;
    zoom.setAttribute("data-testid", "strip-zoomed");
    var zoomCaption = document.createElement("p");
    zoomCaption.className = "hint";
    fig.appendChild(zoom);

    function setMode(m) {
      mode = mode === m ? "" : m;
      zoomBtn.setAttribute("aria-pressed", String(mode === "zoom"));
      calBtn.setAttribute("aria-pressed", String(mode === "calliper"));
      fig.setAttribute("data-mode", mode);
      out.textContent = mode === "zoom" ? "Click the strip where the stretch to zoom into is." :
        mode === "calliper" ? "Click two points on the strip or the zoomed stretch." : out.textContent;
    }
    zoomBtn.addEventListener("click", function () { setMode("zoom"); });
    calBtn.addEventListener("click", function () { setMode("calliper"); });
    clearBtn.addEventListener("click", function () {
      clearMarks();
      out.textContent = "";
      zoom.hidden = true;
      zoom.textContent = "";
    });

    // Seconds from the recording's start at a paper point.
    function seconds(p) {
      var row = Math.max(0, Math.floor(p.y / paper.rowH));
      return row * paper.rowS + (p.x - paper.margin) / paper.speed;
    }

    function clearMarks() {
      document.querySelectorAll("[data-calliper-of='" + key + "']").forEach(function (g) { g.remove(); });
      marks = [];
    }

    function drawMark(target, p, other) {
      var g = document.createElementNS(NS, "g");
      g.setAttribute("class", "calliper");
      g.setAttribute("data-calliper-of", key);
      var top = Math.floor(p.y / paper.rowH) * paper.rowH;
      g.appendChild(line(p.x, top, p.x, top + paper.rowH, "calliper-leg"));
      if (other) g.appendChild(line(other.x, other.y, p.x, p.y, "calliper-span"));
      target.appendChild(g);
    }

    function measure(target, ev) {
      var p = paperPoint(target, ev);
      if (marks.length === 2) clearMarks();
      marks.push(p);
      drawMark(target, p, marks.length === 2 ? marks[0] : null);
      if (marks.length < 2) {
        out.textContent = "First point at " + seconds(p).toFixed(3) + " s; click the second.";
        return;
      }
      var a = marks[0], b = marks[1];
      var ms = Math.abs(seconds(b) - seconds(a)) * 1000;
      var mv = (a.y - b.y) / paper.gain;
      var text = "Interval " + Math.round(ms) + " ms";
      if (ms > 0) text += " (" + Math.round(60000 / ms) + " per minute)";
      text += " · voltage change " + (mv >= 0 ? "+" : "") + mv.toFixed(2) + " mV";
      out.textContent = text;
      out.setAttribute("data-ms", ms.toFixed(1));
      out.setAttribute("data-mv", mv.toFixed(3));
    }

    function showZoom(ev) {
      var p = paperPoint(svg, ev);
      var f = parseInt(factor.value, 10);
      var row = Math.max(0, Math.floor(p.y / paper.rowH));
      var x0 = Math.min(Math.max(0, p.x - STRETCH_MM / 2), Math.max(0, paper.width - STRETCH_MM));
      var copy = svg.cloneNode(true);
      // The copy's patterns need ids of their own.
      copy.querySelectorAll("[id]").forEach(function (el) { el.id = el.id + "-zoom"; });
      copy.querySelectorAll("[fill^='url(#']").forEach(function (el) {
        el.setAttribute("fill", el.getAttribute("fill").replace(/\)$/, "-zoom)"));
      });
      copy.querySelectorAll("[data-calliper-of]").forEach(function (g) { g.remove(); });
      copy.setAttribute("viewBox", x0 + " " + row * paper.rowH + " " + STRETCH_MM + " " + paper.rowH);
      copy.setAttribute("width", (STRETCH_MM * f) + "mm");
      copy.setAttribute("height", (paper.rowH * f) + "mm");
      copy.setAttribute("aria-label", "Zoomed stretch of the ECG strip");
      copy.addEventListener("click", function (e) { if (mode === "calliper") measure(copy, e); });
      var from = row * paper.rowS + (x0 - paper.margin) / paper.speed;
      zoomCaption.textContent = "Seconds " + Math.max(0, from).toFixed(1) + " to " + (from + STRETCH_MM / paper.speed).toFixed(1) +
        ", magnified ×" + f + ": the paper still reads " + paper.speed + " mm/s and " + paper.gain +
        " mm/mV, so a small square is " + Math.round(1000 / paper.speed) + " ms and " + (1 / paper.gain) + " mV; the calliper measures on that scale.";
      zoom.textContent = "";
      zoom.appendChild(copy);
      zoom.appendChild(zoomCaption);
      zoom.hidden = false;
      zoom.setAttribute("data-factor", String(f));
      setMode("calliper");
    }

    svg.addEventListener("click", function (ev) {
      if (mode === "zoom") showZoom(ev);
      else if (mode === "calliper") measure(svg, ev);
    });
  }

  function init() { document.querySelectorAll("figure[data-strip-tools]").forEach(wire); }
  document.addEventListener("DOMContentLoaded", init);
})();

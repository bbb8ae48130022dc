// Chart colours from the stylesheet. The server writes colours into a chart's
// options as tokens, "var(--chart-positive)"; this puts in the stylesheet's
// values (assets/css/charts.css) before app.js draws the chart, so every chart
// wears the app's colours and a colour is changed in one place.
(function () {
  "use strict";
  var token = /var\((--[a-z0-9-]+)\)/g;
  function value(style, name) {
    return style.getPropertyValue(name).trim();
  }
  function resolve(v, style) {
    if (typeof v === "string") {
      return v.indexOf("var(") < 0 ? v : v.replace(token, function (m, name) { return value(style, name) || m; });
    }
    if (Array.isArray(v)) return v.map(function (x) { return resolve(x, style); });
    if (v && typeof v === "object") {
      var out = {};
      Object.keys(v).forEach(function (k) { out[k] = resolve(v[k], style); });
      return out;
    }
    return v;
  }
  window.cohortdeskCharts = {
    // colour returns the options with every token replaced by its value.
    colour: function (opts) { return resolve(opts, getComputedStyle(document.documentElement)); }
  };
})();

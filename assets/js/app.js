// cohortdesk page behaviour. Served from our own origin: the Content-Security-
// Policy forbids inline scripts, so every behaviour is wired here from data-*
// attributes. Pages work without it; it only improves them.
(function () {
  "use strict";

  // Charts: the server renders each chart's options as JSON in the data-chart
  // attribute of an empty element; this draws them with the vendored library.
  function drawCharts(root) {
    if (typeof echarts === "undefined") return;
    root.querySelectorAll("[data-chart]").forEach(function (target) {
      if (target.getAttribute("data-drawn")) return;
      var opts;
      try { opts = JSON.parse(target.getAttribute("data-chart")); } catch (e) { return; }
      if (window.cohortdeskCharts) opts = window.cohortdeskCharts.colour(opts);
      var chart = echarts.init(target, null, { renderer: "svg" });
      chart.setOption(opts);
      target.setAttribute("data-drawn", "1");
      window.addEventListener("resize", function () { chart.resize(); });
      window.addEventListener("beforeprint", function () { chart.resize(); });
    });
  }

  // Keys: assets/js/keys.js.

  // Uploads with visible progress: forms with data-upload show a progress bar.
  function wireUploads(root) {
    root.querySelectorAll("form[data-upload]").forEach(function (form) {
      if (form.getAttribute("data-wired")) return;
      form.setAttribute("data-wired", "1");
      form.addEventListener("submit", function (ev) {
        var bar = form.querySelector("progress");
        if (!bar || !window.XMLHttpRequest) return;
        ev.preventDefault();
        var xhr = new XMLHttpRequest();
        xhr.open("POST", form.action);
        xhr.upload.addEventListener("progress", function (e) {
          if (e.lengthComputable) { bar.max = e.total; bar.value = e.loaded; }
        });
        xhr.onload = function () {
          document.open(); document.write(xhr.responseText); document.close();
          if (xhr.responseURL) history.replaceState(null, "", xhr.responseURL);
        };
        bar.hidden = false;
        xhr.send(new FormData(form));
      });
    });
  }

  // Confirmations for consequential buttons: data-confirm="text".
  document.addEventListener("click", function (ev) {
    var el = ev.target.closest ? ev.target.closest("[data-confirm]") : null;
    if (el && !window.confirm(el.getAttribute("data-confirm"))) ev.preventDefault();
  });

  // Select-all checkboxes: data-select-all="name".
  document.addEventListener("change", function (ev) {
    var el = ev.target;
    if (el.matches && el.matches("[data-select-all]")) {
      var name = el.getAttribute("data-select-all");
      document.querySelectorAll('input[type=checkbox][name="' + name + '"]').forEach(function (c) { c.checked = el.checked; });
    }
  });

  // htmx leaves 4xx answers unswapped; ours for a refused row action (409 a
  // stale copy, 422 a refused input) carry the row with the reason, so show it.
  document.addEventListener("htmx:beforeSwap", function (ev) {
    var status = ev.detail.xhr ? ev.detail.xhr.status : 0;
    if (status === 409 || status === 422) { ev.detail.shouldSwap = true; ev.detail.isError = false; }
  });
  // A row replaced by htmx takes the keyboard focus back, so the next key
  // works on the same case.
  var swappedRow = "";
  document.addEventListener("htmx:beforeRequest", function (ev) {
    var row = ev.detail.elt && ev.detail.elt.closest ? ev.detail.elt.closest("[data-row]") : null;
    swappedRow = row && row.id ? row.id : "";
  });
  document.addEventListener("htmx:afterSettle", function () {
    if (!swappedRow) return;
    var row = document.getElementById(swappedRow);
    swappedRow = "";
    if (!row) return;
    var target = row.querySelector("[role=alert]") ? row.querySelector("select, input:not([type=hidden]), button") : row.querySelector("[data-row-focus]");
    if (target) target.focus();
  });

  function init(root) { drawCharts(root); wireUploads(root); }
  document.addEventListener("DOMContentLoaded", function () { init(document); });
  document.addEventListener("htmx:afterSettle", function (ev) { init(ev.target || document); });
})();

// Date fields in the one date style. A browser draws a date field in its own
// locale's order (12/03/2026 or 03/12/2026); beside each date field (and each
// date-and-time field) the day it holds is written the way every page writes
// dates ("Thu 3 Dec 2026"), so the two can never be read differently. Values
// sent stay YYYY-MM-DD.
(function () {
  "use strict";
  var days = ["Sun", "Mon", "Tue", "Wed", "Thu", "Fri", "Sat"];
  var months = ["Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec"];
  function style(v) {
    var m = /^(\d{4})-(\d{2})-(\d{2})/.exec(v || "");
    if (!m) return "";
    var d = new Date(Date.UTC(+m[1], +m[2] - 1, +m[3]));
    return days[d.getUTCDay()] + " " + d.getUTCDate() + " " + months[d.getUTCMonth()] + " " + d.getUTCFullYear();
  }
  function echo(input) {
    var span = input.nextElementSibling;
    if (!span || !span.classList.contains("date-echo")) {
      span = document.createElement("span");
      span.className = "date-echo";
      span.setAttribute("aria-hidden", "true");
      input.insertAdjacentElement("afterend", span);
    }
    span.textContent = style(input.value);
  }
  function wire(root) {
    root.querySelectorAll('input[type="date"], input[type="datetime-local"]').forEach(echo);
  }
  document.addEventListener("input", function (ev) {
    var t = ev.target;
    if (t.matches && t.matches('input[type="date"], input[type="datetime-local"]')) echo(t);
  });
  document.addEventListener("DOMContentLoaded", function () { wire(document); });
  document.addEventListener("htmx:afterSettle", function (ev) { wire(ev.target || document); });
})();

// The threshold sweep's range follows the parameter chosen: each option of
// select[data-sweep-param] carries its value in the version and the range a
// sweep of it opens with; choosing one fills From and To and says its value.
(function () {
  "use strict";
  document.addEventListener("change", function (ev) {
    var sel = ev.target;
    if (!sel.matches || !sel.matches("select[data-sweep-param]")) return;
    var o = sel.options[sel.selectedIndex];
    if (!o) return;
    var form = sel.form;
    var from = form.querySelector("#from"), to = form.querySelector("#to");
    if (from) from.value = o.getAttribute("data-from") || "";
    if (to) to.value = o.getAttribute("data-to") || "";
    document.querySelectorAll("[data-sweep-current]").forEach(function (el) { el.textContent = o.getAttribute("data-current") || ""; });
    document.querySelectorAll("[data-sweep-name]").forEach(function (el) { el.textContent = o.textContent; });
  });
})();

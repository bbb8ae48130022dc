// The key scheme (web/keys.go says what each key does and which page offers
// it). A key acts on the element that carries it: data-row-key="t" inside the
// row that holds the focus first, else the page's visible data-key="t". Links,
// buttons and check boxes are clicked; a form gets the focus on its first
// field; any other element gets the focus. On a page with a list, l goes to
// the first row and the arrow keys move between rows; Esc leaves a field.
// Keys are single presses, never sequences, and do nothing while a field has
// the focus, or with Ctrl, Alt or Meta held.
(function () {
  "use strict";
  function typing(t) {
    return t && (t.isContentEditable || /^(INPUT|TEXTAREA|SELECT)$/.test(t.tagName));
  }
  function rowOf(el) {
    return el && el.closest ? el.closest("[data-row]") : null;
  }
  function visible(el) {
    return !!(el.offsetWidth || el.offsetHeight || el.getClientRects().length);
  }
  function rows() {
    return Array.prototype.filter.call(document.querySelectorAll("[data-row]"), visible);
  }
  function focusRow(row) {
    var t = row.querySelector("[data-row-focus]") || row.querySelector("a[href], button, input:not([type=hidden]), select");
    if (!t) {
      t = row;
      if (!row.hasAttribute("tabindex")) row.setAttribute("tabindex", "-1");
    }
    t.focus();
    if (t.scrollIntoView) t.scrollIntoView({ block: "nearest" });
  }
  function act(el) {
    if (el.tagName === "FORM") {
      var f = el.querySelector("select, textarea, input:not([type=hidden]), button");
      if (f) f.focus();
      return;
    }
    if (el.tagName === "A" || el.tagName === "BUTTON" || (el.tagName === "INPUT" && el.type === "checkbox")) {
      el.click();
      return;
    }
    el.focus();
  }
  function find(key) {
    var sel = CSS.escape(key);
    var row = rowOf(document.activeElement);
    if (row) {
      var inRow = row.querySelector('[data-row-key="' + sel + '"]');
      if (inRow) return inRow;
    }
    var all = document.querySelectorAll('[data-key="' + sel + '"]');
    for (var i = 0; i < all.length; i++) if (visible(all[i])) return all[i];
    return null;
  }
  // The page's key line lists what the reader's role may do; a step the
  // page does not offer right now (a case that has ended, no row waiting for
  // it) has no element, so its key is left out of the line.
  // The list keys go with a list that has rows.
  var listKeys = { "l": 1, "↓": 1, "↑": 1, "Enter": 1 };
  function trimHints() {
    var hasRows = rows().length > 0;
    document.querySelectorAll("p.keys .key[data-caps]").forEach(function (k) {
      var caps = k.getAttribute("data-caps").split(" ");
      var offered = caps.some(function (c) {
        if (c === "Esc") return true;
        if (listKeys[c]) return hasRows;
        return document.querySelector('[data-key="' + CSS.escape(c) + '"], [data-row-key="' + CSS.escape(c) + '"]');
      });
      k.hidden = !offered;
    });
  }
  document.addEventListener("DOMContentLoaded", trimHints);
  document.addEventListener("htmx:afterSettle", trimHints);

  document.addEventListener("keydown", function (ev) {
    if (ev.ctrlKey || ev.metaKey || ev.altKey || ev.defaultPrevented) return;
    var t = ev.target;
    if (typing(t)) {
      if (ev.key === "Escape") {
        var r = rowOf(t);
        if (r) focusRow(r); else t.blur();
        ev.preventDefault();
      }
      return;
    }
    var list;
    if (ev.key === "ArrowDown" || ev.key === "ArrowUp") {
      var row = rowOf(document.activeElement);
      if (!row) return;
      list = rows();
      var next = list[list.indexOf(row) + (ev.key === "ArrowDown" ? 1 : -1)];
      if (next) focusRow(next);
      ev.preventDefault();
      return;
    }
    if (ev.key === "l") {
      list = rows();
      if (list.length) {
        focusRow(list[0]);
        ev.preventDefault();
      }
      return;
    }
    var el = find(ev.key);
    if (el) {
      ev.preventDefault();
      act(el);
    }
  });
})();

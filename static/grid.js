/* Panelwright: spreadsheet-style entry in the circuit grid (our own script; htmx does the saving).
 *
 * Enter moves to the same field of the next circuit down the same column (Shift+Enter: up);
 * at the bottom of the left column it continues at the top of the right one.  Leaving a field
 * fires "change", on which htmx posts the circuit.  After a successful save the circuit's old
 * error marks are cleared (the server re-renders only the edited cell, so a neighbour being
 * typed into is never overwritten).
 */
(function () {
  "use strict";

  function columnCells(field) {
    var grid = document.getElementById("circuit-grid");
    if (!grid) return [];
    var all = Array.prototype.slice.call(grid.querySelectorAll('[data-col="' + field + '"]'));
    all = all.filter(function (el) { return !el.disabled && el.offsetParent !== null; });
    all.sort(function (a, b) {
      var sa = a.getAttribute("data-side"), sb = b.getAttribute("data-side");
      if (sa !== sb) return sa === "L" ? -1 : 1;
      return Number(a.getAttribute("data-slot")) - Number(b.getAttribute("data-slot"));
    });
    return all;
  }

  document.addEventListener("keydown", function (ev) {
    var el = ev.target;
    if (ev.key !== "Enter" || !el || !el.getAttribute || !el.getAttribute("data-col")) return;
    ev.preventDefault();
    var cells = columnCells(el.getAttribute("data-col"));
    var i = cells.indexOf(el);
    var next = cells[i + (ev.shiftKey ? -1 : 1)];
    if (next) {
      next.focus();
      if (next.select) next.select();
    } else {
      el.blur(); // end of the column: still save
    }
  });

  document.addEventListener("htmx:afterRequest", function (ev) {
    var el = ev.detail && ev.detail.elt;
    if (!el || !el.getAttribute || !el.getAttribute("data-slot")) return;
    if (ev.detail.xhr && ev.detail.xhr.status === 200) {
      var slot = el.getAttribute("data-slot");
      document.querySelectorAll('[id^="td-s' + slot + '-"].invalid').forEach(function (td) {
        td.classList.remove("invalid");
        td.querySelectorAll(".msg").forEach(function (m) { m.remove(); });
        td.querySelectorAll("[aria-invalid]").forEach(function (i) { i.removeAttribute("aria-invalid"); });
      });
    }
  });
})();

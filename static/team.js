/* Panelwright: the CSRF token for forms (our own script).
 *
 * htmx requests carry the token from hx-headers on <body>.  Plain forms carry it as a hidden
 * "csrf_token" input: templates put one in; this script adds it to any POST form that lacks
 * one (forms rendered later by htmx included), reading the token from <meta name="csrf-token">.
 */
(function () {
  "use strict";
  function token() {
    var m = document.querySelector('meta[name="csrf-token"]');
    return m ? m.getAttribute("content") : "";
  }
  function arm(root) {
    var forms = (root || document).querySelectorAll('form[method="post"], form[method="POST"]');
    Array.prototype.forEach.call(forms, function (f) {
      if (f.querySelector('input[name="csrf_token"]')) return;
      var i = document.createElement("input");
      i.type = "hidden";
      i.name = "csrf_token";
      i.value = token();
      f.appendChild(i);
    });
  }
  document.addEventListener("DOMContentLoaded", function () { arm(document); });
  document.addEventListener("submit", function (ev) { if (ev.target && ev.target.parentNode) arm(ev.target.parentNode); }, true);
  document.addEventListener("htmx:load", function (ev) { arm(ev.target && ev.target.querySelectorAll ? ev.target : document); });
})();

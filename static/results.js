// Results table: show/hide a class's per-image rows (htmx loads them on the first click).
(function () {
  "use strict";
  document.addEventListener("click", e => {
    const btn = e.target.closest("button[data-expand]");
    if (!btn) return;
    const row = document.getElementById(btn.dataset.expand);
    if (!row) return;
    const open = btn.getAttribute("aria-expanded") === "true";
    row.hidden = open;
    btn.setAttribute("aria-expanded", String(!open));
    btn.textContent = btn.textContent.replace(open ? "▾" : "▸", open ? "▸" : "▾");
    if (open) e.stopImmediatePropagation();  // closing must not reload the rows
  }, true);
})();

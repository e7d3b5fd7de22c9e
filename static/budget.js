// Budget page: copy the share / edit links, and remember the reviewer's name between sign-offs.
(function () {
  "use strict";
  document.addEventListener("click", async e => {
    const btn = e.target.closest("button[data-copy]");
    if (!btn) return;
    const input = document.getElementById(btn.dataset.copy);
    if (!input) return;
    input.select();
    let ok = false;
    try { await navigator.clipboard.writeText(input.value); ok = true; } catch (err) {
      try { ok = document.execCommand("copy"); } catch (err2) { ok = false; }
    }
    const text = btn.textContent;
    btn.textContent = ok ? "Copied" : "Select and copy";
    setTimeout(() => { btn.textContent = text; }, 1600);
  });

  const KEY = "eightfold.signoff-name";
  function fillNames(root) {
    let name = "";
    try { name = localStorage.getItem(KEY) || ""; } catch (err) { return; }
    if (!name) return;
    root.querySelectorAll('input[data-remember="signoff-name"]').forEach(i => { if (!i.value) i.value = name; });
  }
  document.addEventListener("submit", e => {
    const input = e.target.querySelector('input[data-remember="signoff-name"]');
    if (input && input.value.trim()) {
      try { localStorage.setItem(KEY, input.value.trim()); } catch (err) { /* private mode: fine */ }
    }
  }, true);
  fillNames(document);
  // after each sign-off (an htmx swap) the other classes' empty name fields get the name too
  document.body.addEventListener("htmx:afterSwap", () => fillNames(document));
})();

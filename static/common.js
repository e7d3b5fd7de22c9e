// Every page: behaviour that used to sit in inline handlers, which the Content-Security-Policy refuses.
// A form with data-confirm asks before it posts (the set page's delete).
(function () {
  "use strict";
  document.addEventListener("submit", e => {
    const form = e.target.closest("form[data-confirm]");
    if (form && !window.confirm(form.dataset.confirm)) e.preventDefault();
  }, true);
})();

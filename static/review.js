// Review page: 2:1 zoom, blink original/candidate, SSIM heat-map overlay, keyboard navigation.
(function () {
  "use strict";
  const viewer = document.getElementById("viewer");
  if (!viewer) return;
  const candidate = viewer.querySelector("img.candidate");
  const under = viewer.querySelector("img.original-under");
  const heat = viewer.querySelector("img.heat");
  const label = viewer.querySelector(".blink-label");
  const candidateLabel = label.textContent;
  let blinkTimer = null;

  function press(action, on) {
    const b = document.querySelector('[data-action="' + action + '"]');
    if (b) b.setAttribute("aria-pressed", String(on));
  }
  function showOriginal(on) {
    candidate.hidden = on; under.hidden = !on;
    label.textContent = on ? "Original (blink)" : candidateLabel;
  }
  const actions = {
    zoom() { press("zoom", viewer.classList.toggle("zoomed")); },
    heat() { heat.hidden = !heat.hidden; press("heat", !heat.hidden); },
    blink() {
      if (blinkTimer) { clearInterval(blinkTimer); blinkTimer = null; showOriginal(false); press("blink", false); return; }
      let on = false;
      blinkTimer = setInterval(() => { on = !on; showOriginal(on); }, 700);
      press("blink", true);
    },
  };
  document.querySelectorAll("[data-action]").forEach(b => b.addEventListener("click", () => actions[b.dataset.action]()));
  document.addEventListener("keydown", e => {
    if (e.target.closest("input, textarea, select") || e.ctrlKey || e.metaKey || e.altKey) return;
    const go = id => { const a = document.getElementById(id); if (a) window.location.assign(a.href); };
    switch (e.key) {
      case "ArrowLeft": case "k": go("prev"); break;
      case "ArrowRight": case "j": go("next"); break;
      case "z": actions.zoom(); break;
      case "b": actions.blink(); break;
      case "h": actions.heat(); break;
      default: return;
    }
    e.preventDefault();
  });
})();

// Review page: fit / 1:1 / 2:1 with the two panes scrolling together, blink, SSIM heat-map,
// the weakest spots marked and reachable in place, keyboard shortcuts.
(function () {
  "use strict";
  const viewer = document.getElementById("viewer");
  if (!viewer) return;
  const candidate = viewer.querySelector("img.candidate");
  const under = viewer.querySelector("img.original-under");
  const heat = viewer.querySelector("img.heat");
  const heatKey = document.getElementById("heat-key");
  const label = viewer.querySelector(".blink-label");
  const candidateLabel = label.textContent;
  const frames = Array.from(viewer.querySelectorAll(".frame"));
  const spots = Array.from(document.querySelectorAll(".crop-pair [data-spot]"));
  const pxWidth = Number(candidate.getAttribute("width"));
  let blinkTimer = null;
  let spotIndex = -1;

  function press(selector, on) {
    document.querySelectorAll(selector).forEach(b => b.setAttribute("aria-pressed", String(on)));
  }

  // --- zoom: "fit" | "1" | "2"; keep the centre of what is in view where it is ---
  function setZoom(zoom, keepCentre) {
    const f = frames[0];
    const scale = f.querySelector(".canvas").clientWidth / pxWidth || 1;
    const cx = (f.scrollLeft + f.clientWidth / 2) / scale;
    const cy = (f.scrollTop + f.clientHeight / 2) / scale;
    viewer.dataset.zoom = zoom;
    viewer.classList.toggle("fit", zoom === "fit");
    viewer.classList.toggle("zoomed", zoom === "2");  // "zoomed": 2:1, the designer's main view
    viewer.classList.toggle("actual", zoom === "1");
    document.querySelectorAll("[data-zoom]").forEach(b => {
      if (b.tagName === "BUTTON") b.setAttribute("aria-pressed", String(b.dataset.zoom === zoom));
    });
    if (zoom !== "fit" && keepCentre !== false) scrollTo(cx * Number(zoom), cy * Number(zoom));
  }
  function scrollTo(x, y) {
    frames.forEach(f => { f.scrollLeft = x - f.clientWidth / 2; f.scrollTop = y - f.clientHeight / 2; });
  }

  // --- the two panes scroll together ---
  frames.forEach(f => f.addEventListener("scroll", () => {
    frames.forEach(g => {
      if (g !== f && (g.scrollLeft !== f.scrollLeft || g.scrollTop !== f.scrollTop)) {
        g.scrollLeft = f.scrollLeft; g.scrollTop = f.scrollTop;
      }
    });
  }, { passive: true }));

  function showOriginal(on) {
    candidate.hidden = on; under.hidden = !on;
    label.textContent = on ? "Original (blink)" : candidateLabel;
  }

  function goToSpot(i) {
    const btn = spots[i];
    if (!btn) return;
    spotIndex = i;
    setZoom("2", false);
    const d = btn.dataset;
    scrollTo((Number(d.left) + Number(d.width) / 2) * 2, (Number(d.top) + Number(d.height) / 2) * 2);
    viewer.querySelectorAll(".spot-mark").forEach(m => m.classList.toggle("active", m.dataset.spot === String(i)));
    viewer.scrollIntoView({ block: "nearest", behavior: "smooth" });
  }

  const actions = {
    zoom() { setZoom(viewer.dataset.zoom === "2" ? "fit" : "2"); },
    heat() {
      heat.hidden = !heat.hidden;
      if (heatKey) heatKey.hidden = heat.hidden;
      press('[data-action="heat"]', !heat.hidden);
    },
    blink() {
      if (blinkTimer) { clearInterval(blinkTimer); blinkTimer = null; showOriginal(false); press('[data-action="blink"]', false); return; }
      let on = false;
      blinkTimer = setInterval(() => { on = !on; showOriginal(on); }, 700);
      press('[data-action="blink"]', true);
    },
    marks() { press('[data-action="marks"]', !viewer.classList.toggle("no-marks")); },
    spot() { if (spots.length) goToSpot((spotIndex + 1) % spots.length); },
  };
  document.querySelectorAll("button[data-action]").forEach(b => b.addEventListener("click", () => actions[b.dataset.action]()));
  document.querySelectorAll("button[data-zoom]").forEach(b => b.addEventListener("click", () => setZoom(b.dataset.zoom)));
  spots.forEach((b, i) => b.addEventListener("click", () => goToSpot(i)));

  document.addEventListener("keydown", e => {
    if (e.target.closest("input, textarea, select") || e.ctrlKey || e.metaKey || e.altKey) return;
    // arrows scroll a focused, zoomed pane instead of changing image
    if (e.key.startsWith("Arrow") && e.target.closest(".frame") && viewer.dataset.zoom !== "fit") return;
    const go = id => { const a = document.getElementById(id); if (a) window.location.assign(a.href); };
    switch (e.key) {
      case "ArrowLeft": case "k": go("prev"); break;
      case "ArrowRight": case "j": go("next"); break;
      case "0": setZoom("fit"); break;
      case "1": setZoom("1"); break;
      case "2": setZoom("2"); break;
      case "z": actions.zoom(); break;
      case "b": actions.blink(); break;
      case "h": actions.heat(); break;
      case "m": actions.marks(); break;
      case "s": actions.spot(); break;
      default: return;
    }
    e.preventDefault();
  });
})();

/* Turns each <figure class="ta-chart"> into an interactive chart.
   The site build inlines each chart's Vega-Lite spec in the page (a <script
   type="application/json">), so pages work from a server and from disk alike; the
   static SVG stays as the fallback when scripts are off, a chart cannot be drawn, or a
   page holds no spec (a bundle's own page.md only names the spec file).
   Strings in a spec (column names, category values) are data: Vega draws them as text,
   and tooltips, which are HTML, get every value and title escaped here. */
(function () {
  "use strict";
  var ENTITIES = { "&": "&amp;", "<": "&lt;", ">": "&gt;", '"': "&quot;", "'": "&#39;" };
  function escapeHtml(value) {
    return String(value).replace(/[&<>"']/g, function (c) { return ENTITIES[c]; });
  }
  function renderAll() {
    var figures = document.querySelectorAll("figure.ta-chart");
    figures.forEach(function (figure) {
      if (figure.getAttribute("data-rendered")) { return; }
      var source = figure.querySelector("script.ta-spec");
      if (!source || !source.textContent.trim() || typeof window.vegaEmbed !== "function") {
        return;
      }
      var spec = JSON.parse(source.textContent);
      var holder = document.createElement("div");
      holder.className = "ta-view";
      figure.insertBefore(holder, figure.firstChild);
      window.vegaEmbed(holder, spec, {
        actions: false,
        renderer: "svg",
        tooltip: { sanitize: escapeHtml }
      })
        .then(function () {
          var fallback = figure.querySelector("img");
          if (fallback) { fallback.style.display = "none"; }
          figure.setAttribute("data-rendered", "yes");
        })
        .catch(function (error) {
          holder.remove();
          figure.setAttribute("data-rendered", "failed");
          console.error("chart " + figure.getAttribute("data-chart") + ": " + error);
        });
    });
  }
  if (document.readyState === "loading") {
    document.addEventListener("DOMContentLoaded", renderAll);
  } else {
    renderAll();
  }
})();

/* gammadot study site: draw every plot whose data sit in a JSON block on the page.
   Each <script type="application/json" data-plot="ID"> holds {"data": [...], "layout": {...}}
   for the element with id ID. Works offline: Plotly is loaded from ../assets. */
(function () {
  "use strict";

  function drawAll() {
    var blocks = document.querySelectorAll('script[type="application/json"][data-plot]');
    for (var i = 0; i < blocks.length; i++) {
      var block = blocks[i];
      var target = document.getElementById(block.getAttribute("data-plot"));
      if (!target) { continue; }
      if (typeof window.Plotly === "undefined") {
        target.textContent = "The plotting library could not be loaded; the numbers are in the tables on this page.";
        continue;
      }
      var spec;
      try {
        spec = JSON.parse(block.textContent);
      } catch (err) {
        target.textContent = "The plot data could not be read.";
        continue;
      }
      if (target.clientWidth < 600 && spec.layout && spec.layout.legend) {
        /* narrow screens: legend below the plot, so the plot keeps its width */
        spec.layout.legend.orientation = "h";
        spec.layout.legend.x = 0;
        spec.layout.legend.xanchor = "left";
        spec.layout.legend.y = -0.25;
        spec.layout.legend.yanchor = "top";
      }
      window.Plotly.newPlot(target, spec.data, spec.layout, {
        responsive: true,
        displaylogo: false,
        modeBarButtonsToRemove: ["select2d", "lasso2d"],
        toImageButtonOptions: { format: "png", filename: block.getAttribute("data-plot"), scale: 2 }
      });
    }
  }

  if (document.readyState === "loading") {
    document.addEventListener("DOMContentLoaded", drawAll);
  } else {
    drawAll();
  }
})();

// Renders every chart on the page (and in every fragment htmx swaps in) from the figure
// data the server wrote with json_script: <div class="chart" data-figure="ID"> reads the
// JSON in <script id="ID" type="application/json">.
(function () {
  function render(root) {
    if (typeof Plotly === "undefined") return;
    root.querySelectorAll("[data-figure]").forEach(function (target) {
      var source = document.getElementById(target.dataset.figure);
      if (!source) return;
      var figure = JSON.parse(source.textContent);
      Plotly.react(target, figure.data, figure.layout || {}, {
        displaylogo: false,
        responsive: true,
        modeBarButtonsToRemove: ["select2d", "lasso2d"],
      });
      if (target.dataset.clickUrl) {
        target.on("plotly_click", function (event) {
          var point = event.points && event.points[0];
          var key = point && (point.customdata !== undefined ? point.customdata : point.text);
          if (key === undefined) return;
          var url = target.dataset.clickUrl.replace("__key__", encodeURIComponent(key));
          if (target.dataset.clickTarget && window.htmx) {
            htmx.ajax("GET", url, { target: target.dataset.clickTarget, swap: "outerHTML" });
          } else {
            window.location.href = url;
          }
        });
      }
    });
  }
  if (window.htmx) {
    htmx.onLoad(render);
  } else {
    document.addEventListener("DOMContentLoaded", function () { render(document); });
  }
})();

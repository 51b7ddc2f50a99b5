// Renders every chart on the page (and in every fragment htmx swaps in) from the figure
// data the server wrote with json_script: <div class="chart" data-figure="ID"> reads the
// JSON in <script id="ID" type="application/json">. plotly.js (served from the installed
// plotly package) is loaded only when a page has a chart.
(function () {
  var script = document.currentScript;
  var plotlyUrl = script && script.dataset.plotly;
  var waiting = [];

  function withPlotly(callback) {
    if (typeof Plotly !== "undefined") return callback();
    waiting.push(callback);
    if (waiting.length > 1 || !plotlyUrl) return;
    var tag = document.createElement("script");
    tag.src = plotlyUrl;
    tag.onload = function () { waiting.splice(0).forEach(function (fn) { fn(); }); };
    document.head.appendChild(tag);
  }

  function draw(target) {
    var source = document.getElementById(target.dataset.figure);
    if (!source) return;
    var figure = JSON.parse(source.textContent);
    Plotly.react(target, figure.data, figure.layout || {}, {
      displaylogo: false,
      responsive: true,
      modeBarButtonsToRemove: ["select2d", "lasso2d"],
    });
    if (target.dataset.clickUrl && !target.dataset.clickBound) {
      target.dataset.clickBound = "1";
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
  }

  function render(root) {
    var targets = root.querySelectorAll ? root.querySelectorAll("[data-figure]") : [];
    if (root.dataset && root.dataset.figure) targets = [root].concat(Array.from(targets));
    if (!targets.length) return;
    withPlotly(function () { Array.prototype.forEach.call(targets, draw); });
  }

  if (window.htmx) {
    htmx.onLoad(render);
  } else {
    document.addEventListener("DOMContentLoaded", function () { render(document); });
  }
})();

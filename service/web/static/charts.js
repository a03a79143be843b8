// Draws every <script type="application/json" class="chart-data"> with the vendored uPlot.
// Only options are set here; uPlot does the drawing. Instances stay in window.lkCharts.
(function () {
  "use strict";
  window.lkCharts = {};
  function draw(el) {
    var spec = JSON.parse(el.textContent);
    var box = document.getElementById(spec.id);
    var series = [{ label: spec.x_label }];
    spec.series.forEach(function (s, i) {
      var grey = ["#000", "#444", "#666", "#222", "#555"][i % 5];
      series.push({
        label: s.label,
        stroke: grey,
        width: s.points_only ? 0 : 2,
        dash: s.dash,
        spanGaps: !s.points_only,
        paths: s.points_only ? function () { return null; }
             : s.stepped ? uPlot.paths.stepped({ align: 1 }) : undefined,
        points: s.points_only ? { show: true, size: 11, width: 2, stroke: "#000", fill: "#f0a500" }
                              : { show: false },
      });
    });
    var width = Math.max(300, Math.min(box.clientWidth || 720, 900));
    var opts = {
      title: spec.title,
      width: width,
      height: Math.round(width * 0.5),
      scales: spec.y_range ? { x: { time: false }, y: { range: spec.y_range } }
                           : { x: { time: false } },
      series: series,
      axes: [
        { label: spec.x_label, stroke: "#000", grid: { stroke: "#ddd" } },
        { label: spec.y_label, stroke: "#000", grid: { stroke: "#ddd" }, size: 70 },
      ],
      legend: { show: true, live: false },
      cursor: { drag: { x: false, y: false } },
    };
    window.lkCharts[spec.id] = new uPlot(opts, spec.data, box);
  }
  document.querySelectorAll("script.chart-data").forEach(draw);
})();

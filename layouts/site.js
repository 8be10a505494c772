/* Draw every chart from the inline specs; offer SVG/PNG saving. No network, no eval of data. */
(function () {
  "use strict";
  var views = {};
  function specs() {
    var node = document.getElementById("chart-specs");
    if (!node) { return {}; }
    try { return JSON.parse(node.textContent || "{}"); } catch (e) { console.error("chart specs unreadable", e); return {}; }
  }
  function fail(box, message) {
    box.classList.add("failed");
    box.textContent = "This chart could not be drawn: " + message + " The table below holds its numbers.";
  }
  function draw() {
    var all = specs();
    var boxes = document.querySelectorAll("[data-chart]");
    if (!boxes.length) { return; }
    if (typeof window.vegaEmbed !== "function") {
      boxes.forEach(function (box) { fail(box, "the chart script did not load."); });
      console.error("vegaEmbed is missing");
      return;
    }
    boxes.forEach(function (box) {
      var id = box.getAttribute("data-chart");
      var spec = all[id];
      if (!spec) { fail(box, "its description is missing."); console.error("no spec for " + id); return; }
      window.vegaEmbed(box, spec, { actions: false, mode: "vega-lite", renderer: "svg", tooltip: true })
        .then(function (result) { views[id] = result.view; box.setAttribute("data-drawn", "yes"); })
        .catch(function (error) { fail(box, String(error && error.message || error)); console.error(error); });
    });
  }
  function save(event) {
    var button = event.target.closest("[data-save]");
    if (!button) { return; }
    var id = button.getAttribute("data-for");
    var kind = button.getAttribute("data-save");
    var view = views[id];
    if (!view) { return; }
    view.toImageURL(kind, kind === "png" ? 2 : 1).then(function (url) {
      var link = document.createElement("a");
      link.href = url;
      link.download = id + "." + kind;
      document.body.appendChild(link);
      link.click();
      link.remove();
    }).catch(function (error) { console.error(error); });
  }
  document.addEventListener("click", save);
  if (document.readyState === "loading") { document.addEventListener("DOMContentLoaded", draw); } else { draw(); }
})();

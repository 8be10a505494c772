/* Draw every chart from the inline specs; one group picked in any chart or table is
   highlighted in all of them; "Download picture" saves a PNG with a title band.
   No network, no eval of data: labels are only ever compared as strings, never used as keys. */
(function () {
  "use strict";
  var views = {};   // chart id -> Vega view
  var metas = {};   // chart id -> the spec's usermeta
  var picked = null;  // the highlighted group's label, or null
  var MIN_WIDTH = 260;  // px: the narrowest a chart box is drawn (a phone is 390 px wide)
  var FACET_LABELS = 70;  // px a faceted chart needs beside its panels (y axis and title)
  var NARROW = 480;  // px: below this a chart box gets a two-column legend

  function specs() {
    var node = document.getElementById("chart-specs");
    if (!node) { return {}; }
    try { return JSON.parse(node.textContent || "{}"); } catch (e) { console.error("chart specs unreadable", e); return {}; }
  }
  function fail(box, message) {
    box.classList.add("failed");
    box.textContent = "This chart could not be drawn: " + message + " The table below holds its numbers.";
  }
  function has(list, value) {
    if (!list) { return false; }
    for (var i = 0; i < list.length; i++) { if (list[i] === value) { return true; } }
    return false;
  }
  // The group a clicked item stands for: a mark's datum.group, or a legend/axis/header label.
  function groupOf(item, groups) {
    for (var node = item; node; node = node.mark && node.mark.group) {
      var d = node.datum;
      if (d && typeof d === "object") {
        if (typeof d.group === "string" && has(groups, d.group)) { return d.group; }
        if (typeof d.value === "string" && has(groups, d.value)) { return d.value; }
      }
    }
    return undefined;
  }
  function allGroups() {
    var out = [];
    Object.keys(metas).forEach(function (id) {
      (metas[id].groups || []).forEach(function (g) { if (!has(out, g)) { out.push(g); } });
    });
    return out;
  }
  function markRows() {
    document.querySelectorAll("tr[data-pick]").forEach(function (row) {
      var mine = picked !== null && row.getAttribute("data-pick") === picked;
      row.setAttribute("aria-selected", mine ? "true" : "false");
      row.style.opacity = picked === null || mine ? "" : "0.45";
      row.style.outline = mine ? "2px solid #1d2733" : "";
    });
  }
  function setFocus(group) {
    picked = group === undefined || group === picked ? null : group;
    Object.keys(views).forEach(function (id) {
      if (!metas[id].groups) { return; }
      views[id].signal("focus", picked).runAsync().catch(function (error) { console.error(error); });
    });
    markRows();
  }
  // Table rows whose first cell names a group can be picked with the mouse or the keyboard.
  function pickableRows() {
    var groups = allGroups();
    if (!groups.length) { return; }
    document.querySelectorAll("table tbody tr").forEach(function (row) {
      var cell = row.cells && row.cells[0];
      var name = cell ? cell.textContent.trim() : "";
      if (!has(groups, name)) { return; }
      row.setAttribute("data-pick", name);
      row.setAttribute("tabindex", "0");
      row.setAttribute("title", "Highlight this group in every chart");
    });
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
    var pending = [];
    boxes.forEach(function (box) {
      var id = box.getAttribute("data-chart");
      var spec = all[id];
      if (!spec) { fail(box, "its description is missing."); console.error("no spec for " + id); return; }
      var meta = spec.usermeta || {};
      box.style.minWidth = MIN_WIDTH + "px";
      box.style.maxWidth = "100%";
      if (meta.fit_width) {
        // A faceted chart cannot take the box's width by itself: it is given it here.
        var room = (box.clientWidth || 560) - FACET_LABELS;
        spec = Object.assign({}, spec, { width: Math.max(MIN_WIDTH - FACET_LABELS, Math.min(spec.width || 560, room)) });
      }
      var legend = (spec.config || {}).legend;
      // A folded chart's box has no width yet: the screen's width decides for it.
      var across = Math.min(box.clientWidth || Infinity, document.documentElement.clientWidth);
      if (legend && across < NARROW) {
        // On a phone a legend of several columns, placed over the plot (which starts after
        // the axis labels), runs past the box's edge: one column, and shorter axis labels
        // and axis titles (the full text stays in the tooltips and the tables).
        var axis = (spec.config || {}).axis || {};
        spec = Object.assign({}, spec, { config: Object.assign({}, spec.config, {
          legend: Object.assign({}, legend, { columns: 1, labelLimit: 150 }),
          axis: Object.assign({}, axis, { labelLimit: 120, titleLimit: Math.max(120, across - 40) }) }) });
      }
      pending.push(window.vegaEmbed(box, spec, { actions: false, mode: "vega-lite", renderer: "svg", tooltip: true })
        .then(function (result) {
          var view = result.view;
          views[id] = view;
          metas[id] = meta;
          var svg = box.querySelector("svg");
          // Scales down (never up) when printed or shown in a narrower box than it was drawn for.
          if (svg) { svg.style.maxWidth = "100%"; svg.style.height = "auto"; }
          if (meta.groups) {
            view.addEventListener("click", function (event, item) {
              var group = item ? groupOf(item, meta.groups) : undefined;
              if (group !== undefined) { setFocus(group); }
            });
          }
          box.setAttribute("data-drawn", "yes");
        })
        .catch(function (error) { fail(box, String(error && error.message || error)); console.error(error); }));
    });
    Promise.all(pending).then(function () {
      pickableRows();
      document.documentElement.setAttribute("data-charts-ready", "yes");
    });
  }

  function slug(text) {
    var s = String(text || "").normalize("NFKD").replace(/[\u0300-\u036f]/g, "").toLowerCase();
    return s.replace(/[^a-z0-9]+/g, "-").replace(/^-+|-+$/g, "").slice(0, 60);
  }
  // The build date: printed on reproducible builds (SOURCE_DATE_EPOCH), else the date the page
  // file was written, which for a built site is the build's.
  function builtOn(meta) {
    if (meta.built) { return meta.built; }
    var when = new Date(document.lastModified);
    if (isNaN(when.getTime())) { return "(date unknown)"; }
    var pad2 = function (n) { return (n < 10 ? "0" : "") + n; };
    return when.getFullYear() + "-" + pad2(when.getMonth() + 1) + "-" + pad2(when.getDate());
  }
  // The chart as a PNG with a title band (title; dataset and measure; build date) for slides.
  function picture(id) {
    var view = views[id], meta = metas[id] || {};
    var figure = document.getElementById("fig-" + id);
    var heading = figure && figure.querySelector(".chart-title");
    var title = heading ? heading.textContent.trim() : id;
    var scale = 2;
    return view.toCanvas(scale).then(function (chart) {
      var pad = 16 * scale, band = 58 * scale, foot = 24 * scale;
      var canvas = document.createElement("canvas");
      canvas.width = chart.width + 2 * pad;
      canvas.height = chart.height + band + foot + pad / 2;
      var ctx = canvas.getContext("2d");
      ctx.fillStyle = "#ffffff";
      ctx.fillRect(0, 0, canvas.width, canvas.height);
      ctx.fillStyle = "#f3efe6";
      ctx.fillRect(0, 0, canvas.width, band);
      ctx.fillStyle = "#b8323f";
      ctx.fillRect(0, 0, 6 * scale, band);
      ctx.fillStyle = "#1d2733";
      ctx.textBaseline = "alphabetic";
      ctx.font = "700 " + 16 * scale + "px system-ui, sans-serif";
      ctx.fillText(title, pad, 25 * scale, canvas.width - 2 * pad);
      ctx.font = 12 * scale + "px system-ui, sans-serif";
      ctx.fillStyle = "#4a5563";
      var line = [meta.dataset, meta.measure].filter(Boolean).join(" · ");
      ctx.fillText(line, pad, 45 * scale, canvas.width - 2 * pad);
      ctx.drawImage(chart, pad, band + pad / 2);
      ctx.font = 11 * scale + "px system-ui, sans-serif";
      ctx.fillStyle = "#8a94a0";
      ctx.fillText("Built " + builtOn(meta), pad, canvas.height - 8 * scale);
      var name = [slug(meta.dataset_slug || meta.dataset), slug(meta.measure), meta.kind || ""]
        .filter(Boolean).join("-") || id;
      return { url: canvas.toDataURL("image/png"), name: name + ".png" };
    });
  }
  function save(event) {
    var button = event.target.closest("[data-save]");
    if (!button) { return; }
    var id = button.getAttribute("data-for");
    if (!views[id]) { return; }
    picture(id).then(function (made) {
      var link = document.createElement("a");
      link.href = made.url;
      link.download = made.name;
      document.body.appendChild(link);
      link.click();
      link.remove();
    }).catch(function (error) { console.error(error); });
  }
  document.addEventListener("click", function (event) {
    save(event);
    var row = event.target.closest && event.target.closest("tr[data-pick]");
    if (row) { setFocus(row.getAttribute("data-pick")); }
  });
  document.addEventListener("keydown", function (event) {
    if (event.key === "Escape" && picked !== null) { setFocus(picked); return; }
    var row = event.target.closest && event.target.closest("tr[data-pick]");
    if (row && (event.key === "Enter" || event.key === " ")) {
      event.preventDefault();
      setFocus(row.getAttribute("data-pick"));
    }
  });
  // Read-only handle for the page's own tests and for people scripting a saved page.
  window.sitebuildCharts = { views: views, focus: function (group) { setFocus(group); }, picked: function () { return picked; } };
  if (document.readyState === "loading") { document.addEventListener("DOMContentLoaded", draw); } else { draw(); }
})();

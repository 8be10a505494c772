/* Tables people can use: sort by any column, filter long tables, show when a table scrolls
   sideways; open every folded part for printing and close it again after. No network, no
   inline handlers (the pages' content security policy forbids them), keyboard accessible:
   the sort controls are buttons, the filter is a labelled search box. */
(function () {
  "use strict";
  var FILTER_FROM = 12; // rows from which a table gets a filter box

  function cellValue(cell) {
    if (!cell) { return ""; }
    var raw = cell.getAttribute("data-v");
    if (raw !== null && raw !== "") { return Number(raw); }
    var text = (cell.textContent || "").trim();
    // Page numbers use thousands commas and a real minus sign; "< 0.001" sorts below 0.001.
    var plain = text.replace(/,/g, "").replace(/\u2212/g, "-").replace(/%$/, "").trim();
    if (/^<\s*[0-9.]+$/.test(plain)) { return Number(plain.replace(/^<\s*/, "")) / 2; }
    if (plain !== "" && !isNaN(Number(plain))) { return Number(plain); }
    return text;
  }

  function compare(a, b) {
    var aEmpty = a === "" || a === "\u2014", bEmpty = b === "" || b === "\u2014";
    if (aEmpty || bEmpty) { return aEmpty === bEmpty ? 0 : (aEmpty ? 1 : -1); }
    if (typeof a === "number" && typeof b === "number") { return a - b; }
    if (typeof a === "number") { return -1; }
    if (typeof b === "number") { return 1; }
    return String(a).localeCompare(String(b), undefined, { numeric: true, sensitivity: "base" });
  }

  function sortBy(table, column, button) {
    var body = table.tBodies[0];
    if (!body) { return; }
    var th = button.closest("th");
    var ascending = th.getAttribute("aria-sort") !== "ascending";
    table.querySelectorAll("thead th").forEach(function (h) { h.removeAttribute("aria-sort"); });
    th.setAttribute("aria-sort", ascending ? "ascending" : "descending");
    var rows = Array.prototype.slice.call(body.rows);
    var keyed = rows.map(function (row, i) { return { row: row, key: cellValue(row.cells[column]), i: i }; });
    keyed.sort(function (x, y) {
      var c = compare(x.key, y.key);
      // Missing values stay last either way; ties keep their order.
      var empty = x.key === "" || x.key === "\u2014" || y.key === "" || y.key === "\u2014";
      if (!empty && !ascending) { c = -c; }
      return c || x.i - y.i;
    });
    keyed.forEach(function (k) { body.appendChild(k.row); });
  }

  function makeSortable(table) {
    var head = table.tHead;
    if (!head || !table.tBodies[0] || table.tBodies[0].rows.length < 2) { return; }
    var cells = head.rows[head.rows.length - 1].cells;
    Array.prototype.forEach.call(cells, function (th, column) {
      if (th.querySelector("button")) { return; }
      var button = document.createElement("button");
      button.type = "button";
      button.className = "sort";
      while (th.firstChild) { button.appendChild(th.firstChild); }
      var hint = document.createElement("span");
      hint.className = "visually-hidden";
      hint.textContent = " (sort)";
      button.appendChild(hint);
      th.appendChild(button);
      button.addEventListener("click", function () { sortBy(table, column, button); });
    });
  }

  function addFilter(table) {
    var body = table.tBodies[0];
    if (!body || body.rows.length < FILTER_FROM) { return; }
    var box = table.closest(".table-scroll") || table;
    var label = document.createElement("label");
    label.className = "table-filter";
    var name = (box.getAttribute("aria-label") || "this table");
    label.appendChild(document.createTextNode("Filter rows "));
    var input = document.createElement("input");
    input.type = "search";
    input.setAttribute("aria-label", "Filter rows of " + name);
    var count = document.createElement("span");
    count.className = "filter-count";
    count.setAttribute("aria-live", "polite");
    label.appendChild(input);
    label.appendChild(count);
    box.parentNode.insertBefore(label, box);
    input.addEventListener("input", function () {
      var words = input.value.toLowerCase().split(/\s+/).filter(Boolean);
      var shown = 0;
      Array.prototype.forEach.call(body.rows, function (row) {
        var text = row.textContent.toLowerCase();
        var keep = words.every(function (w) { return text.indexOf(w) !== -1; });
        row.hidden = !keep;
        if (keep) { shown += 1; }
      });
      count.textContent = words.length ? " " + shown + " of " + body.rows.length + " rows" : "";
    });
  }

  function markScrolling() {
    document.querySelectorAll(".table-scroll").forEach(function (box) {
      var scrolls = box.scrollWidth > box.clientWidth + 1;
      box.classList.toggle("scrolls", scrolls);
      var cue = box.previousElementSibling;
      var hasCue = cue && cue.classList && cue.classList.contains("scroll-cue");
      if (scrolls && !hasCue) {
        cue = document.createElement("p");
        cue.className = "scroll-cue";
        cue.textContent = "Wider than the page: scroll the table sideways for more columns \u2192";
        box.parentNode.insertBefore(cue, box);
      } else if (!scrolls && hasCue) {
        cue.remove();
      }
    });
  }

  // Printing: every folded part opens, then closes again; charts sized to their box redraw.
  var openedForPrint = [];
  function openAll() {
    document.querySelectorAll("details:not([open])").forEach(function (d) {
      d.open = true;
      openedForPrint.push(d);
    });
    window.dispatchEvent(new Event("resize"));
  }
  function closeAgain() {
    openedForPrint.forEach(function (d) { d.open = false; });
    openedForPrint = [];
    window.dispatchEvent(new Event("resize"));
  }

  function start() {
    document.querySelectorAll("main table").forEach(function (table) {
      if (table.closest(".bl-table") || table.classList.contains("bl-table")) { return; }
      makeSortable(table);
      addFilter(table);
    });
    markScrolling();
    // A chart drawn while its part was folded had no width to fit; a resize makes it refit.
    document.querySelectorAll("details").forEach(function (d) {
      d.addEventListener("toggle", function () {
        if (d.open) { window.dispatchEvent(new Event("resize")); markScrolling(); }
      });
    });
    window.addEventListener("resize", function () { window.requestAnimationFrame(markScrolling); });
    window.addEventListener("beforeprint", openAll);
    window.addEventListener("afterprint", closeAgain);
    if (window.matchMedia) {
      var print = window.matchMedia("print");
      var onChange = function (e) { if (e.matches) { openAll(); } };
      if (print.addEventListener) { print.addEventListener("change", onChange); }
    }
  }

  if (document.readyState === "loading") { document.addEventListener("DOMContentLoaded", start); } else { start(); }
})();

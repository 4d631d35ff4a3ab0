/* harbourwatch: click a column header of a table.hw-sortable to sort it. */
(function () {
  "use strict";
  function key(cell, numeric) {
    var v = cell.getAttribute("data-sort");
    if (v === null) { v = cell.textContent; }
    if (numeric) { var x = parseFloat(v); return isNaN(x) ? -Infinity : x; }
    return v.toLowerCase();
  }
  document.querySelectorAll("table.hw-sortable").forEach(function (table) {
    var heads = table.querySelectorAll("thead th");
    heads.forEach(function (th, col) {
      var btn = th.querySelector("button");
      if (!btn) { return; }
      btn.addEventListener("click", function () {
        var asc = th.getAttribute("aria-sort") !== "ascending";
        var numeric = th.classList.contains("num");
        var body = table.tBodies[0];
        var rows = Array.prototype.slice.call(body.rows);
        rows.forEach(function (r, i) { r._hwIndex = i; });
        rows.sort(function (a, b) {
          var x = key(a.cells[col], numeric), y = key(b.cells[col], numeric);
          if (x < y) { return asc ? -1 : 1; }
          if (x > y) { return asc ? 1 : -1; }
          return a._hwIndex - b._hwIndex;
        });
        rows.forEach(function (r) { body.appendChild(r); });
        heads.forEach(function (h) { h.removeAttribute("aria-sort"); });
        th.setAttribute("aria-sort", asc ? "ascending" : "descending");
      });
    });
  });
})();

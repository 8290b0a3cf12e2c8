/* Click a column header of a sortable table to sort its rows; click again to reverse.
   Numbers sort by value (data-sort), empty cells last; text sorts case-blind. No network. */
(function () {
  "use strict";
  document.querySelectorAll("table.sortable").forEach(function (table) {
    var heads = table.querySelectorAll("thead th");
    heads.forEach(function (th, index) {
      var button = th.querySelector("button");
      if (!button) { return; }
      button.addEventListener("click", function () {
        var ascending = th.getAttribute("aria-sort") !== "ascending";
        heads.forEach(function (h) { h.removeAttribute("aria-sort"); });
        th.setAttribute("aria-sort", ascending ? "ascending" : "descending");
        var numeric = th.getAttribute("data-numeric") === "1";
        var body = table.tBodies[0];
        var rows = Array.prototype.slice.call(body.rows);
        var key = function (row) {
          var cell = row.cells[index];
          var raw = cell ? (cell.getAttribute("data-sort") || "") : "";
          return numeric ? (raw === "" ? null : parseFloat(raw)) : raw.toLowerCase();
        };
        rows.sort(function (a, b) {
          var x = key(a), y = key(b);
          if (x === null || x === "") { return (y === null || y === "") ? 0 : 1; }
          if (y === null || y === "") { return -1; }
          var order = x < y ? -1 : (x > y ? 1 : 0);
          return ascending ? order : -order;
        });
        rows.forEach(function (row) { body.appendChild(row); });
      });
    });
  });
}());

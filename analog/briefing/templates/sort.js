/* Sortable tables: header buttons, numeric-aware, missing values always last, aria-sort kept current. */
(function () {
  "use strict";
  var collator = (typeof Intl !== "undefined" && Intl.Collator)
    ? new Intl.Collator(undefined, { numeric: true, sensitivity: "base" })
    : null;

  function keyOf(row, index) {
    var cell = row.cells[index];
    if (!cell) { return ""; }
    var value = cell.getAttribute("data-sort");
    return value === null ? cell.textContent.replace(/\s+/g, " ").trim() : value;
  }

  function compareText(a, b) {
    if (collator) { return collator.compare(a, b); }
    return a < b ? -1 : (a > b ? 1 : 0);
  }

  function sortBy(table, th) {
    var headers = th.parentNode.children;
    var index = Array.prototype.indexOf.call(headers, th);
    var numeric = th.getAttribute("data-type") === "number";
    var direction = th.getAttribute("aria-sort") === "ascending" ? "descending" : "ascending";
    var sign = direction === "ascending" ? 1 : -1;
    var body = table.tBodies[0];
    var rows = Array.prototype.slice.call(body.rows).map(function (row, i) {
      var key = keyOf(row, index);
      var missing = key === "";
      var value = numeric && !missing ? parseFloat(key) : key;
      if (numeric && !missing && isNaN(value)) { missing = true; }
      return { row: row, value: value, missing: missing, i: i };
    });
    rows.sort(function (x, y) {
      if (x.missing !== y.missing) { return x.missing ? 1 : -1; }
      if (x.missing) { return x.i - y.i; }
      var c = numeric ? (x.value - y.value) : compareText(x.value, y.value);
      return c !== 0 ? sign * c : x.i - y.i;
    });
    var fragment = document.createDocumentFragment();
    rows.forEach(function (r) { fragment.appendChild(r.row); });
    body.appendChild(fragment);
    Array.prototype.forEach.call(headers, function (h) { h.removeAttribute("aria-sort"); });
    th.setAttribute("aria-sort", direction);
    var status = table.parentNode.querySelector(".sort-status");
    if (status) {
      var label = th.textContent.replace(/\s+/g, " ").trim();
      status.textContent = "Sorted by " + label + ", " + direction + ".";
    }
  }

  function setUp(table) {
    var status = document.createElement("p");
    status.className = "sort-status";
    status.setAttribute("role", "status");
    status.setAttribute("aria-live", "polite");
    status.style.position = "absolute";
    status.style.left = "-9999px";
    table.parentNode.insertBefore(status, table.nextSibling);
    var buttons = table.querySelectorAll("thead th button.sort");
    Array.prototype.forEach.call(buttons, function (button) {
      button.addEventListener("click", function () {
        sortBy(table, button.parentNode);
      });
    });
  }

  Array.prototype.forEach.call(document.querySelectorAll("table.sortable"), setUp);
})();

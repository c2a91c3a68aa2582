(function () {
  function key(cell) { var v = cell.getAttribute("data-v"); return v === null ? cell.textContent : v; }
  document.querySelectorAll("table.data").forEach(function (table) {
    table.querySelectorAll("thead th").forEach(function (th, index) {
      th.addEventListener("click", function () {
        var body = table.tBodies[0], rows = Array.prototype.slice.call(body.rows);
        var up = th.getAttribute("data-dir") !== "up";
        th.setAttribute("data-dir", up ? "up" : "down");
        rows.sort(function (a, b) {
          var x = key(a.cells[index]), y = key(b.cells[index]), nx = parseFloat(x), ny = parseFloat(y);
          var order = (!isNaN(nx) && !isNaN(ny)) ? nx - ny : x.localeCompare(y);
          return up ? order : -order;
        });
        rows.forEach(function (row) { body.appendChild(row); });
      });
    });
  });
  document.querySelectorAll("label.filter").forEach(function (label) {
    var select = label.querySelector("select"), table = document.getElementById(select.getAttribute("data-table"));
    label.hidden = false;
    select.addEventListener("change", function () {
      Array.prototype.forEach.call(table.tBodies[0].rows, function (row) {
        row.hidden = select.value !== "" && row.getAttribute("data-group") !== select.value;
      });
    });
  });
})();

"""The page's only script: sorting and filtering of the calls table. Small, inline, and allowed to
run by its hash in the page's Content-Security-Policy (nothing else can run, and nothing can load).

A view can be given in the address: ``report.html#view:sort=probability:asc;call=positive;q=plate2``
(``q=`` finds text anywhere in a row; ``q==ID`` one specimen exactly, as a click on a well does).
"""

JS = r"""
(function () {
  "use strict";
  document.documentElement.setAttribute("data-script", "ran");
  var table = document.getElementById("calls-table");
  if (!table) { return; }
  var body = table.tBodies[0];
  var rows = Array.prototype.slice.call(body.rows);
  var heads = Array.prototype.slice.call(table.tHead.rows[0].cells);
  var search = document.getElementById("calls-search");
  var pick = document.getElementById("calls-call");
  var status = document.getElementById("calls-status");
  rows.forEach(function (r, i) { r._order = i; });
  function key(row, col) {
    var c = row.cells[col];
    var v = c.getAttribute("data-sort");
    if (v === null) { v = c.getAttribute("data-value"); }
    if (v !== null && heads[col].getAttribute("data-type") === "num") { return parseFloat(v); }
    return c.textContent.toLowerCase();
  }
  function sort(col, dir) {
    var sorted = rows.slice().sort(function (a, b) {
      var x = key(a, col), y = key(b, col);
      if (x < y) { return -dir; }
      if (x > y) { return dir; }
      return a._order - b._order;
    });
    sorted.forEach(function (r) { body.appendChild(r); });
    heads.forEach(function (h, j) {
      if (j === col) { h.setAttribute("aria-sort", dir > 0 ? "ascending" : "descending"); }
      else { h.removeAttribute("aria-sort"); }
    });
  }
  function filter() {
    var q = search.value.trim().toLowerCase(), call = pick.value, shown = 0;
    var exact = q.charAt(0) === "=";
    rows.forEach(function (r) {
      var hay = exact ? "=" + r.getAttribute("data-sample").toLowerCase() : r.textContent.toLowerCase();
      var ok = (call === "" || r.getAttribute("data-call") === call) &&
               (q === "" || (exact ? hay === q : hay.indexOf(q) >= 0));
      r.hidden = !ok;
      if (ok) { shown += 1; }
    });
    status.textContent = "showing " + shown + " of " + rows.length + " specimens";
  }
  heads.forEach(function (h, col) {
    var b = document.createElement("button");
    b.type = "button";
    b.className = "sort";
    b.title = "sort by " + h.textContent;
    while (h.firstChild) { b.appendChild(h.firstChild); }
    h.appendChild(b);
    b.addEventListener("click", function () {
      sort(col, h.getAttribute("aria-sort") === "ascending" ? -1 : 1);
    });
  });
  function column(name) {
    for (var j = 0; j < heads.length; j += 1) {
      if (heads[j].getAttribute("data-key") === name) { return j; }
    }
    return -1;
  }
  function fromAddress() {
    var h, target;
    try { h = decodeURIComponent(location.hash || ""); } catch (e) { return; }
    if (h.indexOf("#why-") === 0) {  // open the specimen's entry the link points at
      target = document.getElementById(h.slice(1));
      if (target && target.tagName === "DETAILS") { target.open = true; target.scrollIntoView(); }
      return;
    }
    if (h.indexOf("#view:") !== 0) { return; }
    h.slice(6).split(";").forEach(function (part) {
      var eq = part.indexOf("="), name = part.slice(0, eq), value = part.slice(eq + 1);
      if (name === "q") { search.value = value; }
      if (name === "call") { pick.value = value; }
      if (name === "sort") {
        var bits = value.split(":"), col = column(bits[0]);
        if (col >= 0) { sort(col, bits[1] === "desc" ? -1 : 1); }
      }
    });
    filter();
  }
  search.addEventListener("input", filter);
  pick.addEventListener("change", filter);
  document.getElementById("calls-reset").addEventListener("click", function () {
    search.value = ""; pick.value = ""; filter();
  });
  Array.prototype.forEach.call(document.querySelectorAll("td.well[data-sample]"), function (w) {
    w.addEventListener("click", function (e) {
      if (e.target.closest && e.target.closest("a")) { return; }  // the link opens its entry
      search.value = "=" + w.getAttribute("data-sample"); pick.value = ""; filter();
      table.scrollIntoView();
    });
  });
  window.addEventListener("beforeprint", function () {  // a filed copy shows everything
    Array.prototype.forEach.call(document.querySelectorAll("details:not(.why)"), function (d) {
      d.open = true;
    });
  });
  document.getElementById("calls-controls").hidden = false;
  window.addEventListener("hashchange", fromAddress);
  filter();
  fromAddress();
}());
"""

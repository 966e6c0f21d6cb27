/* vkit page script: sort and filter the case table, copy rerun commands, flag pictures that fail to load.
   The view follows the URL fragment so it can be linked: #status=fail&q=text&sort=-mismatches
   (sort by a column key, "-" for descending). No dependencies. */
(function () {
  "use strict";
  var table = document.getElementById("cases");
  var statusBox = document.getElementById("status-filter");
  var textBox = document.getElementById("text-filter");
  var sortKey = "";

  function cellValue(row, index, numeric) {
    var cell = row.cells[index];
    var raw = cell.hasAttribute("data-sort") ? cell.getAttribute("data-sort") : cell.textContent;
    return numeric ? parseFloat(raw) || 0 : raw.trim().toLowerCase();
  }

  function sortBy(th, ascending) {
    var body = table.tBodies[0];
    var index = th.cellIndex;
    var numeric = th.getAttribute("data-type") === "num";
    Array.prototype.forEach.call(th.parentNode.cells, function (h) { h.removeAttribute("aria-sort"); });
    th.setAttribute("aria-sort", ascending ? "ascending" : "descending");
    var rows = Array.prototype.slice.call(body.rows);
    rows.sort(function (a, b) {
      var x = cellValue(a, index, numeric), y = cellValue(b, index, numeric);
      var order = x < y ? -1 : x > y ? 1 : 0;
      return ascending ? order : -order;
    });
    rows.forEach(function (r) { body.appendChild(r); });
    sortKey = (ascending ? "" : "-") + th.getAttribute("data-key");
  }

  function statusMatches(status, wanted) {
    if (!wanted) return true;
    if (wanted === "failing") return status !== "pass";
    return status === wanted;
  }

  function applyFilter(updateUrl) {
    var wanted = statusBox.value;
    var text = textBox.value.trim().toLowerCase();
    var shown = 0;
    Array.prototype.forEach.call(table.tBodies[0].rows, function (row) {
      var visible = statusMatches(row.getAttribute("data-status"), wanted) &&
        (!text || row.textContent.toLowerCase().indexOf(text) >= 0);
      row.hidden = !visible;
      if (visible) shown += 1;
      var card = document.getElementById(row.getAttribute("data-target"));
      if (card) card.hidden = !visible;
    });
    document.getElementById("shown-count").textContent = String(shown);
    document.body.setAttribute("data-filter", "status=" + wanted + "&q=" + text);
    if (updateUrl) {
      var parts = [];
      if (wanted) parts.push("status=" + encodeURIComponent(wanted));
      if (text) parts.push("q=" + encodeURIComponent(text));
      if (sortKey) parts.push("sort=" + encodeURIComponent(sortKey));
      try { history.replaceState(null, "", parts.length ? "#" + parts.join("&") : location.pathname); } catch (e) { /* file URL in a strict browser */ }
    }
  }

  function filterFromUrl() {
    var hash = location.hash.replace(/^#/, "");
    if (hash.indexOf("=") < 0) return;  /* a plain anchor such as #case-... */
    var wanted = "", text = "", sort = "";
    hash.split("&").forEach(function (pair) {
      var kv = pair.split("=");
      var value = decodeURIComponent((kv[1] || "").replace(/\+/g, " "));
      if (kv[0] === "status") wanted = value;
      if (kv[0] === "q") text = value;
      if (kv[0] === "sort") sort = value;
    });
    var th = sort && table.tHead.querySelector('th[data-key="' + sort.replace(/^-/, "").replace(/[^a-z_]/g, "") + '"]');
    if (th) sortBy(th, sort.charAt(0) !== "-");
    if (wanted && !Array.prototype.some.call(statusBox.options, function (o) { return o.value === wanted; })) {
      var option = document.createElement("option");
      option.value = option.textContent = wanted;
      statusBox.appendChild(option);
    }
    statusBox.value = wanted;
    textBox.value = text;
    applyFilter(false);
  }

  function copyText(text, button) {
    function done(ok) {
      button.textContent = ok ? "copied" : "select and copy";
      setTimeout(function () { button.textContent = "copy"; }, 1500);
    }
    function fallback() {
      var area = document.createElement("textarea");
      area.value = text;
      document.body.appendChild(area);
      area.select();
      var ok = false;
      try { ok = document.execCommand("copy"); } catch (e) { ok = false; }
      document.body.removeChild(area);
      done(ok);
    }
    if (navigator.clipboard && navigator.clipboard.writeText) {
      navigator.clipboard.writeText(text).then(function () { done(true); }, fallback);
    } else {
      fallback();
    }
  }

  function markPicture(img) {
    if (img.complete && img.naturalWidth > 0) {
      img.setAttribute("data-decoded", img.naturalWidth + "x" + img.naturalHeight);
    } else if (img.complete) {
      img.classList.add("broken");
      img.setAttribute("data-decoded", "failed");
      img.title = "picture not found beside this page: " + (img.parentNode.getAttribute("href") || "");
    }
  }

  if (table) {
    Array.prototype.forEach.call(table.tHead.rows[0].cells, function (th) {
      th.addEventListener("click", function () {
        sortBy(th, th.getAttribute("aria-sort") !== "ascending");
        applyFilter(true);
      });
    });
    statusBox.addEventListener("change", function () { applyFilter(true); });
    textBox.addEventListener("input", function () { applyFilter(true); });
    window.addEventListener("hashchange", filterFromUrl);
    filterFromUrl();
  }
  Array.prototype.forEach.call(document.querySelectorAll("button.copy"), function (b) {
    b.addEventListener("click", function () { copyText(b.getAttribute("data-copy"), b); });
  });
  Array.prototype.forEach.call(document.querySelectorAll("img.pic-img"), function (img) {
    img.addEventListener("load", function () { markPicture(img); });
    img.addEventListener("error", function () { markPicture(img); });
    markPicture(img);
  });
})();

// driftline report: paging, sorting, filtering and event details. Text only, never innerHTML.
(function () {
  "use strict";
  var doc = document;
  doc.documentElement.classList.add("js");

  function itemsOf(box) {
    var parent = box.tBodies ? box.tBodies[0] : box;
    return Array.prototype.filter.call(parent.children, function (el) { return el.hasAttribute("data-item"); });
  }

  function Pager(box) {
    this.box = box;
    this.size = parseInt(box.getAttribute("data-page-size"), 10) || 50;
    this.page = 0;
    var nav = doc.createElement("div");
    nav.className = "pager";
    nav.setAttribute("role", "navigation");
    nav.setAttribute("aria-label", "pages");
    this.prev = doc.createElement("button");
    this.prev.type = "button";
    this.prev.textContent = "‹ previous";
    this.next = doc.createElement("button");
    this.next.type = "button";
    this.next.textContent = "next ›";
    this.status = doc.createElement("span");
    this.status.setAttribute("aria-live", "polite");
    nav.appendChild(this.prev);
    nav.appendChild(this.status);
    nav.appendChild(this.next);
    var anchor = box.parentNode.classList.contains("scroll") ? box.parentNode : box;
    anchor.parentNode.insertBefore(nav, anchor.nextSibling);
    this.nav = nav;
    var self = this;
    this.prev.addEventListener("click", function () { self.page -= 1; self.render(); });
    this.next.addEventListener("click", function () { self.page += 1; self.render(); });
    box.pager = this;
    this.render();
  }
  Pager.prototype.visible = function () {
    return itemsOf(this.box).filter(function (el) { return !el.classList.contains("filtered-out"); });
  };
  Pager.prototype.render = function () {
    var all = itemsOf(this.box), shown = this.visible();
    var pages = Math.max(1, Math.ceil(shown.length / this.size));
    this.page = Math.min(Math.max(this.page, 0), pages - 1);
    var lo = this.page * this.size, hi = lo + this.size;
    var onPage = shown.slice(lo, hi);
    all.forEach(function (el) { el.classList.add("off-page"); });
    onPage.forEach(function (el) { el.classList.remove("off-page"); });
    // What this page shows, out of the items that pass the filters (all of them without one).
    this.status.textContent = "page " + (this.page + 1) + " of " + pages + " · " + onPage.length + " shown of " +
      shown.length + (shown.length < all.length ? " (" + (all.length - shown.length) + " filtered out)" : "");
    this.prev.disabled = this.page === 0;
    this.next.disabled = this.page >= pages - 1;
    this.nav.hidden = pages <= 1 && shown.length === all.length;
  };
  Pager.prototype.show = function (el) {
    var i = this.visible().indexOf(el);
    if (i >= 0) { this.page = Math.floor(i / this.size); this.render(); }
  };

  Array.prototype.forEach.call(doc.querySelectorAll("[data-pager]"), function (box) { new Pager(box); });

  // Field table: filter by name and by drift, sort by a column.
  var table = doc.getElementById("field-table");
  var filter = doc.getElementById("field-filter"), driftOnly = doc.getElementById("drift-only");
  function applyFilter() {
    if (!table) { return; }
    var needle = filter.value.trim().toLowerCase(), drift = driftOnly.checked;
    itemsOf(table).forEach(function (row) {
      var name = (row.getAttribute("data-name") || "").toLowerCase();
      var keep = name.indexOf(needle) >= 0 && (!drift || row.getAttribute("data-drift") !== "0");
      row.classList.toggle("filtered-out", !keep);
    });
    table.pager.page = 0;
    table.pager.render();
  }
  if (table) {
    filter.addEventListener("input", applyFilter);
    driftOnly.addEventListener("change", applyFilter);
    var heads = table.tHead.rows[0].cells;
    Array.prototype.forEach.call(heads, function (th, col) {
      var kind = th.getAttribute("data-sort");
      var button = th.querySelector("button");
      if (!kind || !button) { return; }
      button.addEventListener("click", function () {
        var dir = th.getAttribute("aria-sort") === "ascending" ? "descending" : "ascending";
        Array.prototype.forEach.call(heads, function (h) { h.removeAttribute("aria-sort"); });
        th.setAttribute("aria-sort", dir);
        var sign = dir === "ascending" ? 1 : -1, body = table.tBodies[0];
        var rows = itemsOf(table);
        rows.sort(function (a, b) {
          var x = a.cells[col].getAttribute("data-v"), y = b.cells[col].getAttribute("data-v");
          var c = kind === "num" ? parseFloat(x) - parseFloat(y) : (x < y ? -1 : x > y ? 1 : 0);
          if (c === 0) { c = a.cells[0].getAttribute("data-v") < b.cells[0].getAttribute("data-v") ? -1 : 1; }
          return sign * c;
        });
        rows.forEach(function (r) { body.appendChild(r); });
        table.pager.page = 0;
        table.pager.render();
      });
    });
  }

  // Event flags: details on hover and on keyboard focus.
  var tip = doc.getElementById("tip"), current = null;
  function showTip(mk) {
    current = mk;
    mk.classList.add("on");
    tip.textContent = mk.getAttribute("aria-label");
    tip.hidden = false;
    var r = mk.getBoundingClientRect();
    var left = Math.min(r.left + window.scrollX, window.scrollX + doc.documentElement.clientWidth - tip.offsetWidth - 8);
    tip.style.left = Math.max(4, left) + "px";
    tip.style.top = (r.bottom + window.scrollY + 6) + "px";
  }
  function hideTip() {
    if (current) { current.classList.remove("on"); }
    current = null;
    tip.hidden = true;
  }
  function markerOf(ev) { return ev.target.closest ? ev.target.closest(".mk") : null; }
  doc.addEventListener("focusin", function (ev) { var mk = markerOf(ev); if (mk) { showTip(mk); } });
  doc.addEventListener("focusout", function (ev) { if (markerOf(ev)) { hideTip(); } });
  doc.addEventListener("mouseover", function (ev) { var mk = markerOf(ev); if (mk && mk !== current) { showTip(mk); } });
  doc.addEventListener("mouseout", function (ev) {
    var mk = markerOf(ev);
    if (mk && !(ev.relatedTarget && mk.contains(ev.relatedTarget)) && doc.activeElement !== mk) { hideTip(); }
  });
  doc.addEventListener("keydown", function (ev) { if (ev.key === "Escape") { hideTip(); } });

  // Links into a paged or filtered list open the page that holds the target.
  function reveal() {
    var id = decodeURIComponent(location.hash.slice(1));
    var el = id && doc.getElementById(id);
    if (!el) { return; }
    var box = el.closest("[data-pager]");
    var item = el.hasAttribute("data-item") ? el : el.closest("[data-item]");
    if (box && item && box.pager) {
      if (item.classList.contains("filtered-out") && table && box === table) {
        filter.value = ""; driftOnly.checked = false; applyFilter();
      }
      box.pager.show(item);
    }
    el.scrollIntoView();
  }
  window.addEventListener("hashchange", reveal);
  if (location.hash) { reveal(); }
})();

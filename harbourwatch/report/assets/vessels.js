/* harbourwatch vessel list: search and filters, and a click that shows the vessel on the
   map and moves the replay to it. Data: the JSON block "hw-vessels-data"
   ({rows: [{id, s, e, status, zones, rules}], alerts: [{s, track}], zones and rules: [[value,
   label]] of the filters, day0: seconds from the
   feed start to 00:00 UTC of its first day}); see report/_vessels.py. */
(function () {
  "use strict";
  var el = document.getElementById("hw-vessels-data");
  var table = document.getElementById("hw-vessels");
  if (!el || !table) { return; }
  var cfg = JSON.parse(el.textContent);
  var byIndex = {};
  Array.prototype.forEach.call(table.tBodies[0].rows, function (tr) {
    byIndex[tr.getAttribute("data-i")] = tr;
  });
  var search = document.getElementById("hw-vsearch");
  var from = document.getElementById("hw-vfrom");
  var to = document.getElementById("hw-vto");
  var zone = document.getElementById("hw-vzone");
  var rule = document.getElementById("hw-vrule");
  var status = document.getElementById("hw-vstatus");
  var count = document.getElementById("hw-vcount");
  /* the zone and rule choices, added as text (user strings never pass through HTML here) */
  [[zone, cfg.zones || []], [rule, cfg.rules || []]].forEach(function (pair) {
    pair[1].forEach(function (vl) {
      var o = document.createElement("option");
      o.value = vl[0];
      o.textContent = vl[1];
      o.dir = "auto";
      pair[0].appendChild(o);
    });
  });

  function clockSeconds(input) {  /* "HH:MM" of the feed's first UTC day -> s from feed start */
    if (!input.value) { return null; }
    var p = input.value.split(":");
    return parseInt(p[0], 10) * 3600 + parseInt(p[1], 10) * 60 + (p[2] ? parseFloat(p[2]) : 0)
      + cfg.day0;
  }
  function apply() {
    var q = search.value.trim().toLowerCase(), a = clockSeconds(from), b = clockSeconds(to);
    var shown = 0;
    cfg.rows.forEach(function (r, i) {
      var ok = (!q || r.id.toLowerCase().indexOf(q) >= 0)
        && (a === null || r.e >= a) && (b === null || r.s <= b)
        && (!zone.value || r.zones.indexOf(zone.value) >= 0)
        && (!rule.value || r.rules.indexOf(rule.value) >= 0)
        && (!status.value || r.status === status.value);
      byIndex[String(i)].hidden = !ok;
      if (ok) { shown += 1; }
    });
    count.textContent = shown + " of " + cfg.rows.length + " vessels";
  }
  [search, from, to, zone, rule, status].forEach(function (c) {
    c.addEventListener("input", apply);
    c.addEventListener("change", apply);
  });
  function go(i) {
    var r = cfg.rows[i];
    if (window.hwReplay) { window.hwReplay.goTo(r.s, r.id); }
    Array.prototype.forEach.call(table.tBodies[0].rows, function (tr) {
      tr.classList.toggle("hw-picked", tr.getAttribute("data-i") === String(i));
    });
  }
  table.tBodies[0].addEventListener("click", function (ev) {
    var tr = ev.target.closest("tr");
    if (tr) { go(parseInt(tr.getAttribute("data-i"), 10)); }
  });
  table.tBodies[0].addEventListener("keydown", function (ev) {
    var tr = ev.target.closest("tr");
    if (tr && ev.key === "Enter") { go(parseInt(tr.getAttribute("data-i"), 10)); }
  });
  document.querySelectorAll("button.hw-goto").forEach(function (btn) {
    btn.addEventListener("click", function () {
      var al = cfg.alerts[parseInt(btn.getAttribute("data-alert"), 10)];
      if (window.hwReplay) { window.hwReplay.goTo(al.s, al.track); }
      var m = document.querySelector(".folium-map");
      if (m && m.scrollIntoView) { m.scrollIntoView({ block: "center" }); }
    });
  });
  apply();
})();

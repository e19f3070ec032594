"""The report picture's own script: hover, nets, layers, zoom and pan.

Entry points: :data:`SCRIPT` (the inline script, our own, no library) and
:data:`LAYERS` (the layer switches the report shows).

What the script reads from the picture (:mod:`pipeline.export.svg` writes it):

* ``g.part`` elements with ``data-ref``, ``data-value``, ``data-package``,
  ``data-height`` (mm), ``data-side`` and ``data-nets`` (names separated by
  spaces: net names hold no spaces) - hover shows them in a tooltip;
* any element with ``data-nets`` containing a net, or ``data-net`` equal to
  it (the pads today; tracks and copper areas join by carrying ``data-net``
  too: the page's style sheet strokes them in the highlight colour), lights
  up when that net is picked;
* the layer groups ``.depth-zones`` / ``.cavity-floor``, ``.keepouts``,
  ``.placements``, ``.copper`` and ``.labels``, hidden by a
  ``hide-<layer>`` class on the svg element; ``.congestion`` is drawn with
  ``display="none"`` and shown by a ``show-congestion`` class.

User text reaches the page only through ``textContent`` (never parsed as
markup). Without scripts the controls stay hidden and the picture is the
static drawing.
"""

from __future__ import annotations

__all__ = ["SCRIPT", "LAYERS"]

#: (layer key, label, on at first) of the switches; the key names the
#: ``hide-<key>`` class (set when off) and the ``show-<key>`` class (set when on).
LAYERS = (("zones", "Depth zones", True), ("keepouts", "Keep-outs", True), ("courtyards", "Courtyards", True),
          ("copper", "Copper", True), ("congestion", "Congestion map", False), ("labels", "Labels", True))

SCRIPT = r"""
(function () {
  "use strict";
  var fig = document.getElementById("picture-figure");
  var svg = fig && fig.querySelector("svg");
  if (!svg) { return; }
  var controls = document.getElementById("picture-controls");
  var tip = document.getElementById("picture-tip");
  var netBox = document.getElementById("picture-nets");
  controls.hidden = false;

  Array.prototype.forEach.call(controls.querySelectorAll("input[data-layer]"), function (box) {
    box.addEventListener("change", function () {
      svg.classList.toggle("hide-" + box.getAttribute("data-layer"), !box.checked);
      svg.classList.toggle("show-" + box.getAttribute("data-layer"), box.checked);
    });
  });

  function line(label, value) {
    var row = document.createElement("div");
    var b = document.createElement("b");
    b.textContent = label + " ";
    row.appendChild(b);
    row.appendChild(document.createTextNode(value));
    tip.appendChild(row);
  }
  function showTip(part, ev) {
    tip.textContent = "";
    var d = function (k) { return part.getAttribute("data-" + k) || ""; };
    var head = document.createElement("div");
    head.className = "tip-ref";
    head.textContent = d("ref");
    tip.appendChild(head);
    if (d("value")) { line("value", d("value")); }
    if (d("package")) { line("package", d("package")); }
    if (d("height")) { line("height", d("height") + " mm"); }
    line("side", d("side"));
    line("nets", d("nets") || "none");
    tip.hidden = false;
    moveTip(ev);
  }
  function moveTip(ev) {
    tip.style.left = (ev.clientX + 14) + "px";
    tip.style.top = (ev.clientY + 14) + "px";
  }
  var partOf = {};
  Array.prototype.forEach.call(svg.querySelectorAll("g.part"), function (part) {
    partOf[part.getAttribute("data-ref")] = part;
  });
  // a part and its label (drawn above every courtyard, or at the end of a leader) show the same facts
  Array.prototype.forEach.call(svg.querySelectorAll("g.part, g.label"), function (el) {
    var part = partOf[el.getAttribute("data-ref")];
    if (!part) { return; }
    el.addEventListener("mouseenter", function (ev) { showTip(part, ev); });
    el.addEventListener("mousemove", moveTip);
    el.addEventListener("mouseleave", function () { tip.hidden = true; });
  });

  var picked = null;
  var buttons = {};
  function pick(name) {
    picked = picked === name ? null : name;
    Array.prototype.forEach.call(svg.querySelectorAll(".net-hit"), function (el) {
      el.classList.remove("net-hit");
    });
    svg.classList.toggle("net-active", picked !== null);
    Object.keys(buttons).forEach(function (n) {
      buttons[n].setAttribute("aria-pressed", n === picked ? "true" : "false");
    });
    if (picked === null) { return; }
    Array.prototype.forEach.call(svg.querySelectorAll("[data-nets], [data-net]"), function (el) {
      var nets = (el.getAttribute("data-nets") || "").split(" ");
      if (nets.indexOf(picked) >= 0 || el.getAttribute("data-net") === picked) {
        el.classList.add("net-hit");
      }
    });
  }
  var names = {};
  Array.prototype.forEach.call(svg.querySelectorAll("[data-nets]"), function (el) {
    el.getAttribute("data-nets").split(" ").forEach(function (n) { if (n) { names[n] = true; } });
  });
  Object.keys(names).sort(function (a, b) {
    return a.localeCompare(b, "en", { numeric: true });
  }).forEach(function (n) {
    var b = document.createElement("button");
    b.type = "button";
    b.className = "net";
    b.textContent = n;
    b.setAttribute("data-net-button", n);
    b.setAttribute("aria-pressed", "false");
    b.addEventListener("click", function () { pick(n); });
    buttons[n] = b;
    netBox.appendChild(b);
  });

  var base = svg.getAttribute("viewBox").split(/\s+/).map(Number);
  var view = base.slice();
  function show() { svg.setAttribute("viewBox", view.join(" ")); }
  function zoom(factor, cx, cy) {
    var w = view[2] * factor, h = view[3] * factor;
    if (w > base[2] * 4 || w < base[2] / 40) { return; }
    view = [cx - (cx - view[0]) * factor, cy - (cy - view[1]) * factor, w, h];
    show();
  }
  function toPicture(ev) {
    var m = svg.getScreenCTM();
    var p = svg.createSVGPoint();
    p.x = ev.clientX;
    p.y = ev.clientY;
    return p.matrixTransform(m.inverse());
  }
  svg.addEventListener("wheel", function (ev) {
    ev.preventDefault();
    var p = toPicture(ev);
    zoom(ev.deltaY < 0 ? 0.8 : 1.25, p.x, p.y);
  }, { passive: false });
  Array.prototype.forEach.call(controls.querySelectorAll("button[data-zoom]"), function (b) {
    b.addEventListener("click", function () {
      var how = b.getAttribute("data-zoom");
      if (how === "reset") { view = base.slice(); show(); return; }
      zoom(how === "in" ? 0.8 : 1.25, view[0] + view[2] / 2, view[1] + view[3] / 2);
    });
  });
  var drag = null;
  svg.addEventListener("pointerdown", function (ev) {
    drag = { x: ev.clientX, y: ev.clientY, view: view.slice() };
  });
  svg.addEventListener("pointermove", function (ev) {
    if (!drag || !(ev.buttons & 1)) { drag = null; return; }
    var k = view[2] / svg.getBoundingClientRect().width;
    view = [drag.view[0] - (ev.clientX - drag.x) * k, drag.view[1] - (ev.clientY - drag.y) * k, view[2], view[3]];
    show();
  });
  svg.addEventListener("pointerup", function () { drag = null; });
})();
"""

// The report's pan-and-zoom map: our own canvas drawing, no library, no network.
// Reads its layers from the JSON element #ex-data (made by slopescreen.report.explorer_layers):
// every array is integer codes packed into the bytes of a lossless PNG, decoded with
// createImageBitmap and getImageData. View: screen px = cell * s + t (CSS pixels).
(function () {
  "use strict";
  var root = document.getElementById("ex-map");
  var source = document.getElementById("ex-data");
  if (!root || !source) { return; }
  var data = JSON.parse(source.textContent);
  var G = data.grid;
  var canvas = document.getElementById("ex-canvas");
  var ctx = canvas.getContext("2d");
  var popup = document.getElementById("ex-popup");
  var heading = document.getElementById("ex-heading");
  var view = { s: 1, tx: 0, ty: 0 };
  var fitted = false;
  var codes = {};        // array id -> Promise of Uint32Array
  var painted = {};      // layer id -> Promise of {image, hatch}
  var paths = {};        // overlay index -> Path2D in cell units, once made
  var making = {};       // overlay index -> Promise of its Path2D
  var shade = null;      // {canvas, valid: Uint8Array}
  var state = { layer: null, image: null, hatch: null, f: 1, on: {} };
  var frame = 0;
  var POINT_PX = 96 / 72;

  function el(tag, text, cls) {
    var e = document.createElement(tag);
    if (text !== undefined && text !== null) { e.textContent = text; }
    if (cls) { e.className = cls; }
    return e;
  }

  function rgb(hex) {
    var h = hex.charAt(0) === "#" ? hex.slice(1) : hex;
    return [parseInt(h.slice(0, 2), 16), parseInt(h.slice(2, 4), 16), parseInt(h.slice(4, 6), 16)];
  }

  function bytesOf(b64) {
    var bin = atob(b64);
    var out = new Uint8Array(bin.length);
    for (var i = 0; i < bin.length; i++) { out[i] = bin.charCodeAt(i); }
    return out;
  }

  function pixels(b64) {
    var blob = new Blob([bytesOf(b64)], { type: "image/png" });
    return createImageBitmap(blob, { colorSpaceConversion: "none", premultiplyAlpha: "none" })
      .then(function (bmp) {
        var c = document.createElement("canvas");
        c.width = bmp.width;
        c.height = bmp.height;
        var x = c.getContext("2d", { willReadFrequently: true });
        x.drawImage(bmp, 0, 0);
        var px = x.getImageData(0, 0, bmp.width, bmp.height).data;
        bmp.close();
        return px;
      });
  }

  function codesOf(id) {
    if (!codes[id]) {
      codes[id] = pixels(data.arrays[id].png).then(function (px) {
        var n = px.length / 4;
        var out = new Uint32Array(n);
        for (var i = 0; i < n; i++) {
          out[i] = px[4 * i] | (px[4 * i + 1] << 8) | (px[4 * i + 2] << 16);
        }
        return out;
      });
    }
    return codes[id];
  }

  function scaleOf(id) { return data.arrays[id].k / G.k; }   // array cells per base cell side

  function indexIn(id, row, col) {                 // base cell -> index in an array
    var a = data.arrays[id], f = scaleOf(id);
    return Math.floor(row / f) * a.cols + Math.floor(col / f);
  }

  function decode(q, code) {
    if (!code) { return NaN; }
    var x = q.lo + (code - 1) * q.step;
    return q.log ? Math.pow(10, x) : x;
  }

  function format(q, v) {
    if (!isFinite(v)) { return "no value"; }
    if (q.log) { return Number(v.toPrecision(q.decimals)).toString(); }
    return v.toFixed(q.decimals);
  }

  // ---- painting layers into images of the embedded grid ----

  function loadShade() {
    return pixels(data.shade).then(function (px) {
      var n = G.rows * G.cols;
      var img = new ImageData(G.cols, G.rows);
      var d = img.data;
      var valid = new Uint8Array(n);
      var floor = data.base.floor;
      for (var i = 0; i < n; i++) {
        var g = px[4 * i];
        if (g === 0) { continue; }
        valid[i] = 1;
        var grey = Math.round(255 * (floor + (1 - floor) * (g - 1) / 254));
        d[4 * i] = grey; d[4 * i + 1] = grey; d[4 * i + 2] = grey; d[4 * i + 3] = 255;
      }
      shade = { canvas: toCanvas(img), valid: valid };
    });
  }

  function toCanvas(img) {
    var c = document.createElement("canvas");
    c.width = img.width;
    c.height = img.height;
    c.getContext("2d").putImageData(img, 0, 0);
    return c;
  }

  function paint(layer) {
    if (painted[layer.id]) { return painted[layer.id]; }
    var need = [codesOf(layer.id)];
    if (layer.classes) { need.push(codesOf(layer.classes)); }
    painted[layer.id] = Promise.all(need).then(function (got) {
      var c = got[0];
      var cls = got.length > 1 ? got[1] : null;
      var st = layer.style;
      var A = data.arrays[layer.id];
      var q = A.q;
      var f = scaleOf(layer.id);
      var n = A.rows * A.cols;
      var img = new ImageData(A.cols, A.rows);
      var valid = shade.valid;
      if (f !== 1) {                               // the hillshade's cells at this array's level
        valid = new Uint8Array(n);
        for (var j = 0; j < n; j++) {
          var r0 = Math.floor(j / A.cols) * f, c0 = (j % A.cols) * f;
          valid[j] = r0 < G.rows && c0 < G.cols ? shade.valid[r0 * G.cols + c0] : 0;
        }
      }
      var d = img.data;
      var nv = rgb(data.base.no_value.colour);
      var nva = Math.round(255 * data.base.no_value.alpha);
      var alpha = Math.round(255 * st.alpha);
      var hatch = null;
      var i, v;
      function put(j, col, a) { d[4 * j] = col[0]; d[4 * j + 1] = col[1]; d[4 * j + 2] = col[2]; d[4 * j + 3] = a; }
      if (st.kind === "bands") {
        var bands = st.bands.map(function (b) { return { code: b.code, col: b.colour ? rgb(b.colour) : null }; });
        for (i = 0; i < n; i++) {
          if (c[i] === 0) { if (valid[i]) { put(i, nv, nva); } continue; }
          for (var b = 0; b < bands.length; b++) {
            if (bands[b].code === null || c[i] < bands[b].code) {
              if (bands[b].col) { put(i, bands[b].col, alpha); }
              break;
            }
          }
        }
      } else {
        var lut = [];
        for (i = 0; i < 256; i++) { lut.push(rgb(st.lut.slice(6 * i, 6 * i + 6))); }
        var lo = st.log ? Math.log10(st.vmin) : st.vmin;
        var span = (st.log ? Math.log10(st.vmax) : st.vmax) - lo;
        var dry = st.dry ? rgb(st.dry.colour) : null;
        var drya = st.dry ? Math.round(255 * st.dry.alpha) : 0;
        var mask = cls ? new ImageData(A.cols, A.rows) : null;
        var anyDry = false;
        for (i = 0; i < n; i++) {
          if (cls) {
            var k = cls[i] - 1;
            if (cls[i] === 0) { if (valid[i]) { put(i, nv, nva); } continue; }
            if (k === 1) { put(i, dry, drya); mask.data[4 * i + 3] = 255; anyDry = true; continue; }
          }
          if (c[i] === 0) { if (!cls && valid[i]) { put(i, nv, nva); } continue; }
          v = decode(q, c[i]);
          if (st.below !== null && v < st.below) { continue; }
          var t = ((st.log ? Math.log10(v) : v) - lo) / span;
          t = t < 0 ? 0 : (t > 1 ? 1 : t);
          put(i, lut[Math.min(255, Math.floor(t * 256))], alpha);
        }
        if (anyDry) { hatch = toCanvas(mask); }
      }
      return { image: toCanvas(img), hatch: hatch, f: f };
    });
    return painted[layer.id];
  }

  // ---- line overlays and cluster outlines as paths in cell units ----

  function linePath(ov) {
    var p = new Path2D();
    ov.paths.forEach(function (xy) {
      for (var i = 0; i + 1 < xy.length; i += 2) {
        if (i === 0) { p.moveTo(xy[0], xy[1]); } else { p.lineTo(xy[i], xy[i + 1]); }
      }
    });
    return Promise.resolve(p);
  }

  function outlinePath(ov) {
    return codesOf(ov.array).then(function (c) {
      var p = new Path2D();
      var A = data.arrays[ov.array], f = scaleOf(ov.array);
      var R = A.rows, C = A.cols;
      function lab(r, col) {
        if (r < 0 || col < 0 || r >= R || col >= C) { return 0; }
        var x = c[r * C + col];
        return x > 1 ? x - 1 : 0;
      }
      for (var r = 0; r <= R; r++) {
        for (var col = 0; col <= C; col++) {
          var here = lab(r, col);
          var left = lab(r, col - 1);
          var up = lab(r - 1, col);
          if (r < R && here !== left && (here > 0 || left > 0)) { p.moveTo(col * f, r * f); p.lineTo(col * f, (r + 1) * f); }
          if (col < C && here !== up && (here > 0 || up > 0)) { p.moveTo(col * f, r * f); p.lineTo((col + 1) * f, r * f); }
        }
      }
      return p;
    });
  }

  function pathOf(index) {
    if (!making[index]) {
      var ov = data.overlays[index];
      making[index] = ov.kind === "outline" ? outlinePath(ov) : linePath(ov);
    }
    return making[index];
  }

  function applies(ov) {
    return ov.rain === null || (state.layer !== null && state.layer.rain === ov.rain);
  }

  // ---- drawing ----

  function schedule() {
    if (!frame) { frame = requestAnimationFrame(function () { frame = 0; draw(); }); }
  }

  var hatchPattern = null;
  var scratch = document.createElement("canvas");

  function pattern() {
    if (!hatchPattern) {
      var p = document.createElement("canvas");
      p.width = 6; p.height = 6;
      var x = p.getContext("2d");
      x.strokeStyle = "#000";
      x.lineWidth = 0.8;
      x.beginPath();
      x.moveTo(0, 0); x.lineTo(6, 6); x.moveTo(6, 0); x.lineTo(0, 6);
      x.stroke();
      hatchPattern = ctx.createPattern(p, "repeat");
    }
    return hatchPattern;
  }

  function draw() {
    var dpr = window.devicePixelRatio || 1;
    var w = root.clientWidth, h = root.clientHeight;
    if (!fitted && w > 0) { fit(); }
    if (canvas.width !== Math.round(w * dpr) || canvas.height !== Math.round(h * dpr)) {
      canvas.width = Math.round(w * dpr);
      canvas.height = Math.round(h * dpr);
    }
    ctx.setTransform(dpr, 0, 0, dpr, 0, 0);
    ctx.fillStyle = data.base.background;
    ctx.fillRect(0, 0, w, h);
    var cell = [dpr * view.s, 0, 0, dpr * view.s, dpr * view.tx, dpr * view.ty];
    ctx.setTransform(cell[0], cell[1], cell[2], cell[3], cell[4], cell[5]);
    ctx.imageSmoothingEnabled = false;
    if (shade) { ctx.drawImage(shade.canvas, 0, 0); }
    var sw = state.image ? state.image.width * state.f : 0, sh = state.image ? state.image.height * state.f : 0;
    if (state.image) { ctx.drawImage(state.image, 0, 0, sw, sh); }
    if (state.hatch) {
      scratch.width = canvas.width;
      scratch.height = canvas.height;
      var sx = scratch.getContext("2d");
      sx.setTransform(cell[0], cell[1], cell[2], cell[3], cell[4], cell[5]);
      sx.imageSmoothingEnabled = false;
      sx.drawImage(state.hatch, 0, 0, sw, sh);
      sx.setTransform(1, 0, 0, 1, 0, 0);
      sx.globalCompositeOperation = "source-in";
      sx.fillStyle = pattern();
      sx.fillRect(0, 0, scratch.width, scratch.height);
      ctx.setTransform(1, 0, 0, 1, 0, 0);
      ctx.drawImage(scratch, 0, 0);
      ctx.setTransform(cell[0], cell[1], cell[2], cell[3], cell[4], cell[5]);
    }
    ctx.lineJoin = "round";
    ctx.lineCap = "round";
    data.overlays.forEach(function (ov, i) {
      if (!state.on[i] || !applies(ov) || !paths[i]) { return; }
      var width = ov.width * POINT_PX / view.s;
      if (ov.kind === "lines") {
        ctx.strokeStyle = "#ffffff";
        ctx.lineWidth = 2 * width;
        ctx.stroke(paths[i]);
      }
      ctx.strokeStyle = ov.colour;
      ctx.lineWidth = width;
      ctx.stroke(paths[i]);
    });
    ctx.setTransform(dpr, 0, 0, dpr, 0, 0);
    scaleBar(w, h);
    north(w);
    root.setAttribute("data-view", view.s.toFixed(6) + " " + view.tx.toFixed(3) + " " + view.ty.toFixed(3));
  }

  function nice(len) {
    var p = Math.pow(10, Math.floor(Math.log10(len)));
    var steps = [5, 2, 1];
    for (var i = 0; i < steps.length; i++) { if (steps[i] * p <= len) { return steps[i] * p; } }
    return p;
  }

  function footer() {
    var c = root.querySelector(".ex-caution");
    return c ? c.offsetHeight : 0;
  }

  function scaleBar(w, h) {
    var perPx = G.cell_x * G.unit_m / view.s;        // metres per CSS pixel
    var len = nice(Math.min(160, w * 0.3) * perPx);
    var px = len / perPx;
    var x0 = 14, y0 = h - footer() - 18;
    ctx.fillStyle = "rgba(255,255,255,0.9)";
    ctx.fillRect(x0 - 8, y0 - 20, px + 16, 34);
    ctx.strokeStyle = "#000";
    ctx.lineWidth = 1;
    ctx.fillStyle = "#000";
    ctx.fillRect(x0, y0, px / 2, 7);
    ctx.strokeRect(x0 + 0.5, y0 + 0.5, px - 1, 7);
    ctx.font = "12px sans-serif";
    ctx.textAlign = "center";
    ctx.fillText(len >= 1000 ? (len / 1000) + " km" : len + " m", x0 + px / 2, y0 - 6);
  }

  function north(w) {
    var x = w - 22, y = 10;
    ctx.fillStyle = "rgba(255,255,255,0.9)";
    ctx.fillRect(x - 14, y, 28, 38);
    ctx.fillStyle = "#000";
    ctx.beginPath();
    ctx.moveTo(x, y + 16); ctx.lineTo(x - 7, y + 34); ctx.lineTo(x, y + 29); ctx.lineTo(x + 7, y + 34);
    ctx.closePath();
    ctx.fill();
    ctx.font = "bold 13px sans-serif";
    ctx.textAlign = "center";
    ctx.fillText("N", x, y + 14);
  }

  // ---- view: fit, zoom about a point, pan ----

  function fit() {
    var w = root.clientWidth, h = root.clientHeight - footer();
    view.s = Math.min(w / G.cols, h / G.rows);
    view.tx = (w - G.cols * view.s) / 2;
    view.ty = (h - G.rows * view.s) / 2;
    fitted = true;
  }

  function zoomAt(px, py, factor) {
    var least = Math.min(root.clientWidth / G.cols, root.clientHeight / G.rows) / 4;
    var most = Math.max(64, least * 4);
    var s = Math.max(least, Math.min(most, view.s * factor));
    view.tx = px - (px - view.tx) * (s / view.s);
    view.ty = py - (py - view.ty) * (s / view.s);
    view.s = s;
    hidePopup();
    schedule();
  }

  function local(e) {
    var r = canvas.getBoundingClientRect();
    return [e.clientX - r.left, e.clientY - r.top];
  }

  canvas.addEventListener("wheel", function (e) {
    e.preventDefault();
    var p = local(e);
    var dy = e.deltaMode === 1 ? e.deltaY * 16 : (e.deltaMode === 2 ? e.deltaY * 400 : e.deltaY);
    zoomAt(p[0], p[1], Math.exp(-dy * 0.0015));
  }, { passive: false });

  var drag = null;
  canvas.addEventListener("pointerdown", function (e) {
    if (e.button !== 0) { return; }
    var p = local(e);
    drag = { x: p[0], y: p[1], moved: 0, id: e.pointerId };
    canvas.setPointerCapture(e.pointerId);
  });
  canvas.addEventListener("pointermove", function (e) {
    if (!drag) { return; }
    var p = local(e);
    var dx = p[0] - drag.x, dy = p[1] - drag.y;
    drag.moved += Math.abs(dx) + Math.abs(dy);
    drag.x = p[0];
    drag.y = p[1];
    if (drag.moved > 3) {
      root.classList.add("dragging");
      view.tx += dx;
      view.ty += dy;
      hidePopup();
      schedule();
    }
  });
  function release(e) {
    if (!drag) { return; }
    var moved = drag.moved;
    drag = null;
    root.classList.remove("dragging");
    if (canvas.hasPointerCapture(e.pointerId)) { canvas.releasePointerCapture(e.pointerId); }
    if (moved <= 3 && e.type === "pointerup") { var p = local(e); showValues(p[0], p[1]); }
  }
  canvas.addEventListener("pointerup", release);
  canvas.addEventListener("pointercancel", release);

  function centreZoom(f) { zoomAt(root.clientWidth / 2, root.clientHeight / 2, f); }
  document.getElementById("ex-in").addEventListener("click", function () { centreZoom(1.5); });
  document.getElementById("ex-out").addEventListener("click", function () { centreZoom(1 / 1.5); });
  document.getElementById("ex-fit").addEventListener("click", function () { fit(); hidePopup(); schedule(); });
  window.addEventListener("resize", schedule);
  document.addEventListener("keydown", function (e) { if (e.key === "Escape") { hidePopup(); } });

  // ---- the values of a cell ----

  function hidePopup() { popup.hidden = true; }

  function showValues(px, py) {
    var col = Math.floor((px - view.tx) / view.s);
    var row = Math.floor((py - view.ty) / view.s);
    if (row < 0 || col < 0 || row >= G.rows || col >= G.cols) { hidePopup(); return Promise.resolve(null); }
    var V = data.values;
    var asks = [];
    function ask(kind, rain, id, label) { if (id) { asks.push({ kind: kind, rain: rain, id: id, label: label }); } }
    V.fs.forEach(function (p) { ask("fs", p[0], p[1], "Factor of safety FS: " + p[0]); });
    V.pf.forEach(function (p) { ask("pf", p[0], p[1], "Probability of failure P_f: " + p[0]); });
    V.bound.forEach(function (p) { ask("bound", p[0], p[1], "Lower bound on cluster FS: " + p[0]); });
    V.cluster.forEach(function (p) { ask("cluster", p[0], p[1], "Failure cluster id: " + p[0]); });
    ask("soil", null, V.soil, "Soil unit");
    ask("slope", null, V.slope, "Slope (degrees)");
    ask("segment", null, V.segment, "Corridor segment chainage (m)");
    var L = state.layer;
    if (L && !asks.some(function (a) { return a.id === L.id; })) { ask("layer", L.rain, L.id, L.title + " (" + L.units + ")"); }
    return Promise.all(asks.map(function (a) { return codesOf(a.id); })).then(function (got) {
      popup.textContent = "";
      var close = el("button", "\u00d7");
      close.type = "button";
      close.title = "Close";
      close.addEventListener("click", hidePopup);
      popup.appendChild(close);
      var x = G.left + (col + 0.5) * G.cell_x;
      var y = G.top - (row + 0.5) * G.cell_y;
      popup.appendChild(el("strong", G.k > 1 ? "Block of " + G.k + " \u00d7 " + G.k + " cells" : "Cell"));
      var where = el("p", "E " + x.toFixed(1) + ", N " + y.toFixed(1) + " (" + G.crs + "); grid row " +
        (row * G.k) + ", column " + (col * G.k));
      where.setAttribute("data-value", "coordinates");
      popup.appendChild(where);
      var table = el("table");
      asks.forEach(function (a, j) {
        var A = data.arrays[a.id];
        var code = got[j][indexIn(a.id, row, col)];
        var q = A.q;
        var text;
        if (a.kind === "soil") {
          text = code ? (data.soil_labels[code - 1] || String(code - 1)) : "none";
        } else if (a.kind === "segment") {
          text = code ? (data.segments.from_m[code - 1].toLocaleString("en") + " to " +
            data.segments.to_m[code - 1].toLocaleString("en")) : "outside the strips";
        } else if (a.kind === "cluster") {
          text = code > 1 ? String(code - 1) : "none";
        } else {
          text = format(q, decode(q, code));
        }
        if (A.k > 1 && A.rule) { text += " (" + A.rule + " of " + A.k + " \u00d7 " + A.k + ")"; }
        var tr = el("tr");
        tr.setAttribute("data-value", a.kind);
        if (a.rain !== null) { tr.setAttribute("data-rain", a.rain); }
        tr.appendChild(el("th", a.label));
        tr.appendChild(el("td", text));
        table.appendChild(tr);
      });
      popup.appendChild(table);
      popup.appendChild(el("p", "FS " + data.rounding.fs + "; P_f " + data.rounding.pf + "; slope " +
        data.rounding.slope + "." + (G.k > 1 ? " Values at the displayed resolution; full detail in the GeoTIFF products." : "")));
      popup.hidden = false;
      var w = root.clientWidth, h = root.clientHeight;
      var left = Math.min(px + 12, w - popup.offsetWidth - 6);
      var top = Math.min(py + 12, h - popup.offsetHeight - footer() - 4);
      popup.style.left = Math.max(4, left) + "px";
      popup.style.top = Math.max(4, top) + "px";
      return { row: row, col: col };
    });
  }

  // ---- the layer switcher, the line checkboxes and the legend ----

  function swatch(entry) {
    var c = document.createElement("canvas");
    c.width = 22; c.height = 14;
    var x = c.getContext("2d");
    if (entry.kind === "line") {
      x.strokeStyle = entry.edge;
      x.lineWidth = Math.max(1, entry.width * POINT_PX);
      x.beginPath(); x.moveTo(1, 7); x.lineTo(21, 7); x.stroke();
      return c;
    }
    if (entry.face && entry.face !== "none") { x.fillStyle = entry.face; x.fillRect(1, 1, 20, 12); }
    if (entry.hatch) {
      x.strokeStyle = "#000"; x.lineWidth = 0.8; x.beginPath();
      for (var k = -12; k < 22; k += 5) { x.moveTo(k, 13); x.lineTo(k + 12, 1); x.moveTo(k, 1); x.lineTo(k + 12, 13); }
      x.stroke();
    }
    if (entry.edge && entry.edge !== "none") {
      x.strokeStyle = entry.edge; x.lineWidth = entry.width ? entry.width * POINT_PX : 1; x.strokeRect(1.5, 1.5, 19, 11);
    }
    return c;
  }

  function lines(text, into) {
    text.split("\n").forEach(function (part, i) {
      if (i) { into.appendChild(document.createElement("br")); }
      into.appendChild(document.createTextNode(part));
    });
    return into;
  }

  function legend() {
    var box = document.getElementById("ex-legend");
    box.textContent = "";
    var L = state.layer;
    if (!L) { box.appendChild(el("p", "Hillshade of the DEM only.")); return; }
    var st = L.style;
    box.appendChild(lines(st.label, el("p")));
    if (st.kind !== "bands") {
      var bar = document.createElement("canvas");
      bar.width = 200; bar.height = 12;
      var x = bar.getContext("2d");
      for (var i = 0; i < 200; i++) { x.fillStyle = "#" + st.lut.slice(6 * Math.floor(i * 256 / 200), 6 * Math.floor(i * 256 / 200) + 6); x.fillRect(i, 0, 1, 12); }
      box.appendChild(bar);
      var ends = el("div");
      ends.style.justifyContent = "space-between";
      ends.style.width = "200px";
      ends.appendChild(el("span", String(st.vmin)));
      ends.appendChild(el("span", (st.log ? "log scale, " : "") + "to " + st.vmax));
      box.appendChild(ends);
    }
    st.legend.forEach(function (entry) {
      var row = el("div");
      row.appendChild(swatch(entry));
      row.appendChild(lines(entry.label, el("span")));
      box.appendChild(row);
    });
    var q = data.arrays[L.id].q;
    var note = "Values " + q.rounding + ".";
    var A = data.arrays[L.id];
    if (A.k > 1) { note += " Each map cell is a block of " + A.k + " \u00d7 " + A.k + " grid cells holding the " + A.rule + " value; full detail in " + L.file + "."; }
    box.appendChild(el("p", note));
  }

  function select(layer) {
    state.layer = layer;
    heading.textContent = layer ? layer.title : "Hillshade";
    legend();
    overlayStates();
    hidePopup();
    if (!layer) { state.image = null; state.hatch = null; schedule(); return Promise.resolve(); }
    return paint(layer).then(function (p) {
      if (state.layer === layer) { state.image = p.image; state.hatch = p.hatch; state.f = p.f; schedule(); }
    });
  }

  var boxes = [];
  function overlayStates() {
    boxes.forEach(function (b, i) { b.disabled = !applies(data.overlays[i]); });
    schedule();
  }

  function build() {
    var set = document.getElementById("ex-layers");
    var groups = {};
    var order = [];
    data.layers.forEach(function (L) { if (!groups[L.group]) { groups[L.group] = []; order.push(L.group); } groups[L.group].push(L); });
    function radio(label, layer, checked) {
      var lab = el("label");
      var input = el("input");
      input.type = "radio";
      input.name = "ex-layer";
      input.checked = checked;
      input.value = layer ? layer.id : "";
      input.addEventListener("change", function () { if (input.checked) { select(layer); } });
      lab.appendChild(input);
      lab.appendChild(document.createTextNode(" " + label));
      set.appendChild(lab);
    }
    var first = null;
    data.layers.forEach(function (L) { if (!first && L.key === "factor_of_safety") { first = L; } });
    first = first || data.layers[0];
    order.forEach(function (g) {
      set.appendChild(el("h4", g));
      groups[g].forEach(function (L) { radio(L.title.replace(": " + L.rain, ""), L, L === first); });
    });
    set.appendChild(el("h4", "None"));
    radio("Hillshade only", null, false);
    var lineSet = document.getElementById("ex-overlays");
    if (!data.overlays.length) { lineSet.appendChild(el("p", "No lines in this run.")); }
    data.overlays.forEach(function (ov, i) {
      var lab = el("label");
      var input = el("input");
      input.type = "checkbox";
      input.checked = ov.kind === "outline" || ov.label.indexOf("strip") < 0;
      state.on[i] = input.checked;
      input.addEventListener("change", function () {
        state.on[i] = input.checked;
        if (input.checked) { pathOf(i).then(function (p) { paths[i] = p; schedule(); }); } else { schedule(); }
      });
      if (input.checked) { pathOf(i).then(function (p) { paths[i] = p; schedule(); }); }
      boxes.push(input);
      lab.appendChild(input);
      lab.appendChild(document.createTextNode(" "));
      lab.appendChild(swatch({ kind: "line", edge: ov.colour, width: ov.width }));
      lab.appendChild(document.createTextNode(" " + ov.label));
      lineSet.appendChild(lab);
    });
    return first;
  }

  var ready = loadShade().then(function () { return select(build()); }).then(function () {
    root.setAttribute("data-ready", "1");
  });

  window.slopescreenExplorer = {
    ready: ready,
    grid: G,
    view: function () { return { s: view.s, tx: view.tx, ty: view.ty }; },
    screenOf: function (row, col) {
      var r = canvas.getBoundingClientRect();
      return { x: r.left + view.tx + (col + 0.5) * view.s, y: r.top + view.ty + (row + 0.5) * view.s };
    },
    layers: function () { return data.layers.map(function (L) { return L.key + "|" + (L.rain || ""); }); },
    select: function (key, rain) {
      var found = data.layers.filter(function (L) { return L.key === key && (L.rain || null) === (rain || null); })[0];
      var inputs = document.getElementsByName("ex-layer");
      for (var i = 0; i < inputs.length; i++) { inputs[i].checked = found ? inputs[i].value === found.id : false; }
      return select(found || null);
    }
  };
})();

/* interkit 3D view: an anywidget module around the offline 3Dmol.js.
   LIB (prepended by Python) holds the library text, or null when it is not installed.
   Nothing is loaded from the network. Atom numbers are 0-based, as in the Python API. */

function ensureLibrary() {
  if (typeof window.$3Dmol !== "undefined") return true;
  if (!LIB) return false;
  const s = document.createElement("script");
  // hide AMD/CommonJS globals so the bundle attaches itself to window
  s.textContent = "(function (define, exports, module) {\n" + LIB + "\n}).call(window);";
  document.head.appendChild(s);
  return typeof window.$3Dmol !== "undefined";
}

function pt(c) { return {x: c[0], y: c[1], z: c[2]}; }

function render({ model, el }) {
  const uid = model.get("uid");
  const style = model.get("palette");
  const box = document.createElement("div");
  box.id = uid;
  box.className = "interkit-3d";
  box.style.cssText = `position: relative; width: ${model.get("width")}px; height: ${model.get("height")}px;`;
  const caption = document.createElement("div");
  caption.className = "interkit-3d-caption";
  caption.style.cssText = "font-size: 85%; color: #444; max-width: " + model.get("width") + "px";
  el.appendChild(box);
  el.appendChild(caption);
  const showCaption = () => { caption.textContent = model.get("caption"); };
  showCaption();
  model.on("change:caption", showCaption);
  if (!ensureLibrary()) {
    box.innerHTML = '<p style="color:#8a1c1c;background:#fff1e6;padding:6px">' +
      "3D view unavailable: the 3Dmol.js library file is not installed " +
      "(interkit/widgets/static/3Dmol-min.js).</p>";
    model.set("status", "library missing");
    model.save_changes();
    return;
  }
  const v = window.$3Dmol.createViewer(box, {backgroundColor: style.background});
  const entry = {viewer: v, frame: null, shown: 0, zoomed: false, surfaces: 0, clicks: 0};
  window.interkitViews = window.interkitViews || {};
  entry.scene = function () { return model.get("frames")[entry.frame || 0]; };
  window.interkitViews[uid] = entry;
  let fragmentOfModel = {}, volumeShapes = [], pickShapes = [];
  const elementMap = Object.assign({}, style.elements);

  function atomIndex(atom) {
    const scene = model.get("frames")[entry.frame || 0];
    const frag = fragmentOfModel[atom.model];
    if (!scene || !frag) return null;
    return scene.index[frag][atom.index];
  }

  function onClick(atom) {
    if (!model.get("pickable")) return;
    const i = atomIndex(atom);
    if (i === null || i === undefined) return;
    entry.clicks += 1;
    entry.lastPicked = i;
    model.set("picked", model.get("picked").concat([i]).slice(-2));
    model.set("clicks", entry.clicks);
    model.save_changes();
  }

  function build(frames) {
    /* every scan point is a frame: switching points is setFrame + one render */
    v.removeAllModels(); v.removeAllShapes(); v.removeAllLabels();
    volumeShapes = []; pickShapes = []; fragmentOfModel = {};
    ["A", "B"].forEach(function (f) {
      const m = v.addModelsAsFrames(frames.map(function (s) { return s[f]; }).join(""), "xyz");
      fragmentOfModel[m.getID()] = f;
      m.setStyle({}, {stick: {radius: 0.13, color: style.fragments[f]},
                      sphere: {scale: 0.27, colorscheme: {prop: "elem", map: elementMap}}});
    });
    const labels = model.get("labels");
    frames.forEach(function (scene, k) {
      (scene.xyz || []).forEach(function (c, i) {
        const f = scene.fragment[i];
        v.addSphere({center: pt(c), radius: 0.5, color: style.fragments[f], opacity: 0.22, frame: k});
        if (labels) {
          v.addLabel(scene.symbols[i] + i, {position: pt(c), frame: k, fontSize: 11, fontColor: "#111111",
            backgroundColor: "#ffffff", backgroundOpacity: 0.6, showBackground: true, inFront: true,
            alignment: "bottomLeft"}, undefined, true);
        }
      });
      if (scene.line) {
        const p = pt(scene.line[0]), q = pt(scene.line[1]);
        v.addCylinder({start: p, end: q, radius: 0.05, color: style.line, dashed: true,
                       fromCap: 1, toCap: 1, frame: k});
        [p, q].forEach(function (c) { v.addSphere({center: c, radius: 0.11, color: style.line, frame: k}); });
        if (scene.label) {
          v.addLabel(scene.label, {position: {x: (p.x + q.x) / 2, y: (p.y + q.y) / 2, z: (p.z + q.z) / 2},
                     fontSize: 12, fontColor: "#1d1d1d", backgroundColor: "#ffffff",
                     backgroundOpacity: 0.75, showBackground: true, inFront: true, frame: k}, undefined, true);
        }
      }
      (scene.arrows || []).forEach(function (a) {
        v.addArrow({start: pt(a[0]), end: pt(a[1]), radius: 0.06, color: style.arrow, frame: k});
      });
    });
  }

  function drawPicked() {
    pickShapes.forEach(function (s) { v.removeShape(s); });
    pickShapes = [];
    const scene = model.get("frames")[entry.frame || 0];
    if (scene && scene.xyz) {
      model.get("picked").forEach(function (i) {
        if (i >= 0 && i < scene.xyz.length) {
          pickShapes.push(v.addSphere({center: pt(scene.xyz[i]), radius: 0.62, color: style.pick,
                                       opacity: 0.55, wireframe: true}));
        }
      });
    }
  }

  function drawVolume() {
    volumeShapes.forEach(function (s) { v.removeShape(s); });
    volumeShapes = [];
    const vol = model.get("volume");
    if (vol && vol.cube) {
      const data = new window.$3Dmol.VolumeData(vol.cube, "cube");
      const iso = Math.abs(model.get("isovalue"));
      volumeShapes.push(v.addIsosurface(data, {isoval: iso, color: style.gain, opacity: 0.75, smoothness: 2}));
      volumeShapes.push(v.addIsosurface(data, {isoval: -iso, color: style.loss, opacity: 0.75, smoothness: 2}));
    }
    entry.surfaces = volumeShapes.length;
    v.render();
    model.set("surfaces", entry.surfaces);
    model.save_changes();
    box.setAttribute("data-surfaces", String(entry.surfaces));
  }

  entry.go = function (frame) {
    const done = function () {
      v.setClickable({}, true, onClick);
      drawPicked();
      v.render();
      entry.frame = frame; entry.shown += 1;
      box.setAttribute("data-frame", String(frame));
    };
    entry.frame = frame;
    const r = v.setFrame(frame);
    if (r && r.then) { r.then(done); } else { done(); }
  };
  entry.load = function (frames, frame) {
    build(frames);
    if (!entry.zoomed) { v.setFrame(frame); v.zoomTo(); v.zoom(1.3); entry.zoomed = true; }
    entry.go(frame);
    if ((model.get("volume") || {}).cube) drawVolume();
  };
  model.on("change:frame", function () { entry.go(model.get("frame")); });
  model.on("change:frames", function () { entry.load(model.get("frames"), model.get("frame")); });
  model.on("change:labels", function () { entry.load(model.get("frames"), model.get("frame")); });
  model.on("change:picked", drawPicked);
  model.on("change:volume", drawVolume);
  model.on("change:isovalue", drawVolume);
  entry.load(model.get("frames"), model.get("frame"));
  model.set("status", "ready");
  model.save_changes();
}

export default { render };

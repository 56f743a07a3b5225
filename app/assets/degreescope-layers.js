/* degreescope: the fit chart's two stacked layers (app/layers.py) move together.
 *
 * The curve layer (#fit-chart) lies above the points layer (#fit-points) and lets pointer
 * events through its plot area (degreescope.css), so hover, click, zoom and pan happen on the
 * points layer; the curve layer's modebar and legend stay live. Whatever changes one layer's
 * axis ranges or drag mode (a drag, a double click, a modebar button) is copied to the other.
 */
(function () {
    "use strict";
    const IDS = ["fit-points", "fit-chart"];

    function graph(id) { return document.querySelector("#" + id + " .js-plotly-plot"); }

    function sameRange(a, b) {
        return !!a && !!b && Math.abs(a[0] - b[0]) <= 1e-12 * (Math.abs(a[0]) + 1) &&
            Math.abs(a[1] - b[1]) <= 1e-12 * (Math.abs(a[1]) + 1);
    }

    function follow(from, to) {
        const fl = from._fullLayout, tl = to._fullLayout;
        if (!fl || !tl || !fl.xaxis || !tl.xaxis) { return; }
        const update = {};
        ["xaxis", "yaxis"].forEach(function (ax) {
            if (!sameRange(fl[ax].range, tl[ax].range)) { update[ax + ".range"] = fl[ax].range.slice(); }
        });
        if (fl.dragmode !== tl.dragmode) { update.dragmode = fl.dragmode; }
        if (Object.keys(update).length && window.Plotly) { window.Plotly.relayout(to, update); }
    }

    function watch() {
        const pair = IDS.map(graph);
        if (!pair[0] || !pair[1] || !pair[0].on || !pair[1].on) { return; }
        pair.forEach(function (gd, i) {
            if (gd.__degreescopeLayer) { return; }
            gd.__degreescopeLayer = true;
            gd.on("plotly_relayout", function () {
                const other = graph(IDS[1 - i]);
                if (other) { follow(gd, other); }
            });
        });
    }
    // The degree slider, watched natively: a key press or a drag changes its thumb's
    // aria-valuenow, and the curve is drawn from the frames at once, with no Dash callback on
    // the way (each one costs the page several store updates). Once the degree has rested for
    // the panel's data-settle-ms, it is written to the settled-degree store, which the model
    // card, the predictions, the evidence and the figure sync follow.
    let frames = null, bands = [], settleTurn = 0, lastDrawn = null, slider = null;
    function onDegree() {
        const thumb = slider && slider.querySelector("[role=slider]");
        if (!thumb) { return; }
        const d = Number(thumb.getAttribute("aria-valuenow"));
        if (!Number.isFinite(d) || d === lastDrawn) { return; }
        lastDrawn = d;
        if (frames) { window.degreescopeLayers.draw(frames, Math.max(0, Math.min(frames.max, d)), bands); }
        const panel = slider.closest("[data-settle-ms]");
        const wait = panel ? Number(panel.getAttribute("data-settle-ms")) : 350;
        const me = ++settleTurn;
        setTimeout(function () {
            const dc = window.dash_clientside;
            if (me === settleTurn && dc && dc.set_props) { dc.set_props("degree-settled", {data: d}); }
        }, wait);
    }
    function watchSlider() {
        const el = document.getElementById("degree");
        if (!el || el === slider) { return; }
        slider = el;
        lastDrawn = null;
        new MutationObserver(onDegree).observe(el, {subtree: true, attributes: true, attributeFilter: ["aria-valuenow"]});
        onDegree();
    }

    // dcc.Graph makes its plot when the figure first arrives; look until both are there, and
    // again after a page change replaces them
    setInterval(function () { watch(); watchSlider(); }, 400);

    // packed float32 arrays ({dtype: "f4", bdata}) decoded once per frames record
    const decoded = new WeakMap();
    function f32(spec) {
        let out = decoded.get(spec);
        if (!out) {
            const bin = atob(spec.bdata), bytes = new Uint8Array(bin.length);
            for (let i = 0; i < bin.length; i++) { bytes[i] = bin.charCodeAt(i); }
            out = new Float32Array(bytes.buffer);
            decoded.set(spec, out);
        }
        return out;
    }
    // Plotly's own text (a title, an annotation, a legend entry) given new words in place, line
    // for line, with no redraw; false when the lines or markup differ (the figure sync at rest
    // then draws it)
    function retext(node, words) {
        if (!node) { return false; }
        const lines = String(words).split("<br>");
        if (lines.some(function (l) { return /[<>&]/.test(l); })) { return false; }
        const spans = node.querySelectorAll("tspan.line");
        if (spans.length !== (lines.length > 1 ? lines.length : 0)) { return false; }
        if (spans.length) {
            lines.forEach(function (l, i) { spans[i].textContent = l; });
        } else {
            node.textContent = lines[0];
        }
        node.setAttribute("data-unformatted", words);
        return true;
    }
    function caption(gd) { return gd.querySelector('g.annotation[data-index="0"] .annotation-text'); }
    // the layout keeps the words too, so that a zoom or resize before the sync draws the same
    function keepTitle(gd, words) {
        [gd.layout, gd._fullLayout].forEach(function (l) { if (l && l.title) { l.title.text = words; } });
        return retext(gd.querySelector(".gtitle"), words);
    }
    function keepCaption(gd, words) {
        [gd.layout, gd._fullLayout].forEach(function (l) {
            if (l && l.annotations && l.annotations[0]) { l.annotations[0].text = words; }
        });
        return retext(caption(gd), words);
    }
    function keepName(gd, i, name) {
        const old = gd._fullData[i] && gd._fullData[i].name;
        [gd.data[i], gd._fullData[i]].forEach(function (t) { if (t) { t.name = name; } });
        const entry = Array.prototype.find.call(gd.querySelectorAll(".legendtext"), function (n) {
            return n.textContent === old;
        });
        return !entry || retext(entry, name);
    }
    // The error chart's column (layout shape 0) and ring (the one marker of trace `ring`) moved
    // as drawn: the column translated from where plotly put it, the marker put at (d, y) on the
    // axes; true when both could be moved that way.
    function moveMark(eg, ring, d, y) {
        const fl = eg._fullLayout, sh = fl && fl.shapes;
        const col = eg.querySelector('.shapelayer path[data-index="0"]');
        if (!sh || !sh.length || !col || !fl.xaxis || !fl.yaxis || y === null) { return false; }
        const traces = eg.querySelectorAll(".scatterlayer .trace");
        const mine = Array.prototype.find.call(traces, function (g) {
            const cd = g.__data__ && g.__data__[0];
            return !!cd && !!cd.trace && cd.trace.index === ring;
        });
        const dot = mine && mine.querySelector("path.point");
        const py = fl.yaxis.c2p(y);
        if (!dot || !Number.isFinite(py)) { return false; }  // the ring appears: plotly draws it
        const drawn = (sh[0].x0 + sh[0].x1) / 2;  // the column's centre where plotly put it
        col.setAttribute("transform", "translate(" + (fl.xaxis.c2p(d) - fl.xaxis.c2p(drawn)) + ",0)");
        dot.setAttribute("transform", "translate(" + fl.xaxis.c2p(d) + "," + py + ")");
        return true;
    }
    // a curve's new values through plotly's transition path: the few traces are drawn again,
    // without a full replot of axes, legend and annotations
    const STEP = {transition: {duration: 0}, frame: {duration: 0, redraw: false}, mode: "immediate"};
    let markTurn = 0;

    window.degreescopeLayers = {
        /* the frames and bands in force (the figure sync hands them over: panels/degree.py SYNC_JS) */
        use: function (newFrames, newBands) { frames = newFrames; bands = newBands || []; },
        /* A key press: degree d's curve and shown bands go straight into the curve layer (one
           transition of its few traces; no other graph is touched), its title, caption and
           legend entry take the new words in place, and the error chart's mark moves one
           animation frame later, for the latest press only. The figure properties are brought
           up to date once the degree rests (panels/degree.py, SYNC_JS). */
        draw: function (frames, d, bands) {
            const gd = graph("fit-chart"), f = frames && frames.frames && frames.frames[String(d)];
            const ix = frames && frames.traces;
            if (!gd || !f || !ix || !window.Plotly || !gd.data || gd.data.length <= ix.curve) { return false; }
            const meta = gd.layout && gd.layout.meta;
            if (!meta || meta.frames !== frames.stamp) { return false; }  // frames of another split: wait for them
            const idx = [ix.curve], data = [{y: f32(f.curve)}];
            const add = function (key) { idx.push(ix[key]); data.push({y: f32(f[key])}); };
            if (bands.indexOf("prediction") >= 0) { add("pred_lo"); add("pred_hi"); }
            if (bands.indexOf("confidence") >= 0) { add("conf_lo"); add("conf_hi"); }
            window.Plotly.animate(gd, {data: data, traces: idx}, STEP);
            const words = [keepTitle(gd, f.title), keepCaption(gd, f.fit_caption), keepName(gd, ix.curve, f.name)];
            if (words.indexOf(false) >= 0) {  // words plotly has to lay out: one relayout of the text
                window.Plotly.relayout(gd, {"title.text": f.title, "annotations[0].text": f.fit_caption});
            }
            const me = ++markTurn;
            requestAnimationFrame(function () {
                const eg = graph("error-chart");
                if (me !== markTurn || !eg || !eg.layout) { return; }
                const y = f.test_rmse;
                if (moveMark(eg, frames.ring, d, y) && keepCaption(eg, f.caption)) { return; }
                window.Plotly.update(eg, {x: [[d]], y: [[y]]}, {
                    "shapes[0].x0": d - 0.4, "shapes[0].x1": d + 0.4, "annotations[0].text": f.caption
                }, [frames.ring]);
            });
            return true;
        },

        /* both layers as one figure (points, then curve layer), on the curve layer's layout, opaque */
        combined: function () {
            const pts = graph("fit-points"), fit = graph("fit-chart");
            if (!pts || !fit || !pts.data || !fit.data) { return null; }
            const layout = JSON.parse(JSON.stringify(fit.layout));
            layout.paper_bgcolor = (pts.layout && pts.layout.paper_bgcolor) || "#fffdf8";
            layout.plot_bgcolor = "#ffffff";
            ["xaxis", "yaxis"].forEach(function (ax) {
                layout[ax] = Object.assign({}, layout[ax], {
                    range: fit._fullLayout[ax].range.slice(), autorange: false, showgrid: true
                });
            });
            return {data: pts.data.concat(fit.data), layout: layout};
        }
    };
})();

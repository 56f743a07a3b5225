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
    let markTurn = 0;

    window.degreescopeLayers = {
        /* the frames and bands in force (the figure sync hands them over: panels/degree.py SYNC_JS) */
        use: function (newFrames, newBands) { frames = newFrames; bands = newBands || []; },
        /* A key press: draw degree d's curve and shown bands straight into the curve layer (one
           Plotly.update of its few traces; no other graph is touched), then move the error chart's
           mark two animation frames later, for the latest press only. The figure properties are
           brought up to date once the degree rests (panels/degree.py, SYNC_JS). */
        draw: function (frames, d, bands) {
            const gd = graph("fit-chart"), f = frames && frames.frames && frames.frames[String(d)];
            const ix = frames && frames.traces;
            if (!gd || !f || !ix || !window.Plotly || !gd.data || gd.data.length <= ix.curve) { return false; }
            const meta = gd.layout && gd.layout.meta;
            if (!meta || meta.frames !== frames.stamp) { return false; }  // frames of another split: wait for them
            const idx = [ix.curve], ys = [f32(f.curve)], names = [f.name];
            const add = function (key) { idx.push(ix[key]); ys.push(f32(f[key])); names.push(gd.data[ix[key]].name); };
            if (bands.indexOf("prediction") >= 0) { add("pred_lo"); add("pred_hi"); }
            if (bands.indexOf("confidence") >= 0) { add("conf_lo"); add("conf_hi"); }
            window.Plotly.update(gd, {y: ys, name: names}, {"title.text": f.title, "annotations[0].text": f.fit_caption}, idx);
            const me = ++markTurn;
            requestAnimationFrame(function () { requestAnimationFrame(function () {
                const eg = graph("error-chart");
                if (me !== markTurn || !eg || !eg.layout || !eg.layout.shapes || eg.layout.shapes.length < 2) { return; }
                const y = f.test_rmse;
                window.Plotly.relayout(eg, {
                    "shapes[0].x0": d - 0.4, "shapes[0].x1": d + 0.4, "shapes[1].xanchor": d,
                    "shapes[1].yanchor": y === null ? 1 : y, "shapes[1].visible": y !== null,
                    "annotations[0].text": f.caption
                });
            }); });
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

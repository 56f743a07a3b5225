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
    // dcc.Graph makes its plot when the figure first arrives; look until both are there, and
    // again after a page change replaces them
    setInterval(watch, 400);

    window.degreescopeLayers = {
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

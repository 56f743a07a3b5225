/* degreescope: chart images in the browser, and a warning for files the upload box drops. */
(function () {
    "use strict";
    const CHARTS = {
        "fit-png": ["fit-chart", "png"], "fit-svg": ["fit-chart", "svg"],
        "error-png": ["error-chart", "png"], "error-svg": ["error-chart", "svg"]
    };
    const NAMES = {"fit-chart": "degreescope-fit", "error-chart": "degreescope-error-by-degree"};

    window.degreescope = {
        saveChart: function (buttonId) {
            const spec = CHARTS[buttonId];
            if (!spec) { return null; }
            // the fit chart is two stacked layers: the image holds both (degreescope-layers.js)
            const gd = spec[0] === "fit-chart" && window.degreescopeLayers
                ? window.degreescopeLayers.combined()
                : document.querySelector("#" + spec[0] + " .js-plotly-plot");
            if (!gd || !window.Plotly) { return "chart not ready"; }
            // presentation size; the chart already carries its title, axis titles and caption
            window.Plotly.downloadImage(gd, {
                format: spec[1], width: 1600, height: 900, scale: 1, filename: NAMES[spec[0]]
            });
            return spec.join(".") + "@" + Date.now();
        }
    };

    // dcc.Upload drops files above its max_size without a word; say so here.
    function sizeText(n) {
        return n >= 1048576 ? (n / 1048576).toFixed(1) + " MiB" : Math.round(n / 1024) + " KiB";
    }
    function check(files) {
        const box = document.getElementById("upload-box");
        const out = document.getElementById("upload-size-warning");
        if (!box || !out || !files || !files.length) { return; }
        const limit = Number(box.getAttribute("data-limit") || 0);
        const f = files[0];
        // the upload box itself accepts up to 1/8 above the limit; the server answers those
        const hard = limit + Math.max(Math.floor(limit / 8), 262144);
        out.textContent = (limit && f.size > hard)
            ? "The file " + f.name + " is " + sizeText(f.size) + ", over this server's upload limit of " +
              sizeText(limit) + "; it was not sent. Use a smaller file or ask for a higher limit."
            : "";
    }
    document.addEventListener("change", function (ev) {
        const t = ev.target;
        if (t && t.type === "file" && t.closest && t.closest("#upload")) { check(t.files); }
    }, true);
    document.addEventListener("drop", function (ev) {
        const t = ev.target;
        if (t && t.closest && t.closest("#upload") && ev.dataTransfer) { check(ev.dataTransfer.files); }
    }, true);
})();

/* Graphs: plotly.js's basic bundle (scatter and bar are all our figures draw; histograms
   are binned on the server), a quarter of the full bundle's size and start-up.

   dcc.Graph loads plotly.js when a page's first graph appears, from window._dashPlotlyJSURL
   (unless window.Plotly already exists). Point that URL at assets/vendor; the renderer
   sets it later, so the property keeps our value. Pages without graphs load none. Should a
   future Dash read another name, the full bundle loads as before: slower, still correct.
   (Loading the bundle early, while the page's content is on its way, was measured: it
   slowed the graph-free Today page and did not reliably speed the others.) */
(function () {
  var here = document.currentScript && document.currentScript.src;
  if (!here) { return; }
  var url = here.replace(/graph-bundle\.js(\?.*)?$/, "vendor/plotly-basic.min.js");
  Object.defineProperty(window, "_dashPlotlyJSURL", {
    configurable: true,
    get: function () { return url; },
    set: function () { /* keep ours */ }
  });
})();

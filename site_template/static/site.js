/* gammadot study site: the page's small behaviours, no other library than Plotly.
   - plots: every <script type="application/json" data-plot="ID"> holds {data, layout[, views]}
     for the element with id ID; views switch the y data (viscosity / stress);
   - tables with class "sortable": headings are buttons that sort the rows;
   - table tools: a text filter and a verdict filter over the rows (and the overview plot);
   - links to points (data-point): mark the point on the page's plots, and back;
   - printing: closed <details> are opened while printing.
   Works offline and from file://: nothing is loaded from anywhere else. */
(function () {
  "use strict";

  var plots = {};  /* id -> {el, spec} */
  var status = null;

  function say(text) {
    if (!status) { status = document.getElementById("pick-status"); }
    if (status) { status.textContent = text; }
  }

  /* ------------------------------------------------------------------ plots */

  function drawPlot(block) {
    var id = block.getAttribute("data-plot");
    var target = document.getElementById(id);
    if (!target) { return null; }
    if (typeof window.Plotly === "undefined") {
      target.textContent = "The plotting library could not be loaded; the numbers are in the tables on this page.";
      return null;
    }
    var spec;
    try {
      spec = JSON.parse(block.textContent);
    } catch (err) {
      target.textContent = "The plot data could not be read.";
      return null;
    }
    var width = target.clientWidth;
    if (spec.layout && spec.layout.legend && width < 900) {
      if (width < 520) {
        /* phones: legend below the plot, so the plot keeps the width; a taller box for both */
        spec.layout.legend.orientation = "h";
        spec.layout.legend.x = 0;
        spec.layout.legend.xanchor = "left";
        spec.layout.legend.y = -0.25;
        spec.layout.legend.yanchor = "top";
        target.style.height = "38rem";
      } else {
        spec.layout.legend.font = { size: 11 };  /* tablets: the legend stays beside the plot */
      }
    }
    var plot = plots[id] = { el: target, spec: spec, view: 0, runs: null, shown: null };
    if (spec.views) {
      spec.views[0].y = spec.data.map(function (t) { return t.y; });
    }
    var data = spec.data;
    if (spec.dense) {
      /* many runs: drawn as a few traces (one per line style, runs separated by gaps), which a
         browser draws several times faster than one trace per run; filters and views rebuild them */
      plot.runs = spec.data;
      data = mergeRuns(plot);
    }
    var drawn = window.Plotly.newPlot(target, data, spec.layout, {
      responsive: true,
      displaylogo: false,
      modeBarButtonsToRemove: ["select2d", "lasso2d"],
      toImageButtonOptions: { format: "png", filename: id, scale: 2 }
    });
    target.on("plotly_click", function (event) {
      var point = event && event.points && event.points[0];
      if (!point || point.customdata === undefined || point.customdata === null) { return; }
      var kind = point.data.meta && point.data.meta.kind;
      if (kind === "highlight" || kind === "fit" || kind === "band") { return; }
      pickPoint(Number(point.customdata), point.data.meta && point.data.meta.run_id);
    });
    setUpViews(id);
    return drawn;
  }

  /* The runs' traces of a dense overlay, shown ones only, merged by line style. */
  function mergeRuns(plot) {
    var view = plot.spec.views ? plot.spec.views[plot.view] : null;
    var groups = {}, order = [];
    plot.runs.forEach(function (t, i) {
      if (plot.shown && !plot.shown[t.meta.run_id]) { return; }
      var ys = view && view.y ? view.y[i] : t.y;
      var marker = t.marker || {};
      var key = [t.mode, t.line && t.line.color, t.line && t.line.dash, marker.symbol, marker.color].join("|");
      var group = groups[key];
      if (!group) {
        group = groups[key] = {
          type: "scatter", mode: t.mode, x: [], y: [], text: [], line: t.line, marker: t.marker,
          connectgaps: false, showlegend: false, hoverlabel: { namelength: 0 },
          hovertemplate: "%{text}<br>γ̇ = %{x:.4g} 1/s<br>" + (view ? view.symbol : "η") + " = %{y:.4g} " +
                         (view ? view.unit : "Pa·s") + "<extra></extra>",
          meta: { kind: "merged" }
        };
        order.push(key);
      }
      var label = (t.legendgroup ? t.legendgroup + " · " : "") + t.name.replace(/: excluded points$/, "");
      for (var k = 0; k < t.x.length; k++) {
        group.x.push(t.x[k]);
        group.y.push(ys[k]);
        group.text.push(label + " · point " + t.customdata[k] + (t.text ? t.text[k] : ""));
      }
      group.x.push(null); group.y.push(null); group.text.push("");
    });
    return order.map(function (key) { return groups[key]; });
  }

  function setUpViews(id) {
    var switcher = document.querySelector('[data-views-for="' + id + '"]');
    var plot = plots[id];
    if (!switcher || !plot.spec.views) { return; }
    switcher.hidden = false;
    var buttons = switcher.querySelectorAll("button[data-view]");
    Array.prototype.forEach.call(buttons, function (button, index) {
      button.addEventListener("click", function () {
        showView(id, index);
        Array.prototype.forEach.call(buttons, function (b, j) {
          b.setAttribute("aria-pressed", j === index ? "true" : "false");
        });
      });
    });
  }

  function showView(id, index) {
    var plot = plots[id];
    var view = plot.spec.views[index];
    if (plot.runs) {
      plot.view = index;
      window.Plotly.react(plot.el, mergeRuns(plot), plot.el.layout);
      window.Plotly.relayout(plot.el, { "yaxis.title.text": view.axis, "yaxis.autorange": true });
      return;
    }
    var traces = [], ys = [], metas = [];
    plot.el.data.forEach(function (trace, i) {
      if (view.y[i] === undefined || view.y[i] === null) { return; }
      var meta = {};
      var old = trace.meta || {};
      Object.keys(old).forEach(function (k) { meta[k] = old[k]; });
      meta.symbol = view.symbol;
      meta.unit = view.unit;
      traces.push(i); ys.push(view.y[i]); metas.push(meta);
    });
    plot.view = index;
    window.Plotly.restyle(plot.el, { y: ys, meta: metas }, traces);
    window.Plotly.relayout(plot.el, { "yaxis.title.text": view.axis, "yaxis.autorange": true });
  }

  function drawAll() {
    var blocks = document.querySelectorAll('script[type="application/json"][data-plot]');
    var pending = [];
    for (var i = 0; i < blocks.length; i++) {
      var drawn = drawPlot(blocks[i]);
      if (drawn) { pending.push(drawn); }
    }
    return Promise.all(pending);
  }

  /* ------------------------------------------------------------------ points */

  function pointOf(trace, index) {
    var data = trace.customdata;
    if (!data) { return -1; }
    for (var k = 0; k < data.length; k++) {
      if (Number(data[k]) === index) { return k; }
    }
    return -1;
  }

  /* Mark point ``index`` on every plot of the page (its points traces), and its rows. */
  function markPoint(index) {
    Object.keys(plots).forEach(function (id) {
      var el = plots[id].el;
      if (!el.data) { return; }
      var highlight = -1, x = [], y = [];
      el.data.forEach(function (trace, i) {
        var kind = trace.meta && trace.meta.kind;
        if (kind === "highlight") { highlight = i; return; }
        if (kind !== "points" || trace.visible === false || trace.visible === "legendonly") { return; }
        var k = pointOf(trace, index);
        if (k >= 0 && x.length === 0) { x = [trace.x[k]]; y = [trace.y[k]]; }
      });
      if (highlight >= 0) {
        window.Plotly.restyle(el, { x: [x], y: [y] }, [highlight]);
      }
    });
    var rows = document.querySelectorAll("tr[data-point]");
    Array.prototype.forEach.call(rows, function (row) {
      row.classList.toggle("picked", Number(row.getAttribute("data-point")) === index);
    });
  }

  function pickPoint(index, runId) {
    if (runId !== undefined && runId !== null && !document.getElementById("point-" + index)) {
      say("Run " + runId + ", point " + index + ". Its run page lists its findings.");
      return;
    }
    markPoint(index);
    var findings = document.querySelectorAll('.findings tr[data-point="' + index + '"]').length;
    say("Point " + index + " is marked with a star on the plots" +
        (findings ? "; " + findings + (findings === 1 ? " finding names it" : " findings name it") + " (highlighted below)."
                  : "; no check reported on it.") );
  }

  function setUpPointLinks() {
    var links = document.querySelectorAll("a.point-link[data-point]");
    Array.prototype.forEach.call(links, function (link) {
      link.addEventListener("click", function (event) {
        if (!Object.keys(plots).length) { return; }  /* no plot: plain jump to the data row */
        event.preventDefault();
        var index = Number(link.getAttribute("data-point"));
        markPoint(index);
        var first = document.querySelector(".plot-figure");
        if (first) { first.scrollIntoView({ block: "start" }); }
        say("Point " + index + " is marked with a star on the plots. Its values are in row " + index +
            " of the data table.");
      });
    });
  }

  /* ------------------------------------------------------------------ tables */

  function cellValue(row, column) {
    var cell = row.cells[column];
    if (!cell) { return ""; }
    var sort = cell.getAttribute("data-sort");
    return sort !== null ? sort : cell.textContent.trim().toLowerCase();
  }

  function sortTable(table, column, numeric, ascending) {
    var body = table.tBodies[0];
    var rows = Array.prototype.slice.call(body.rows);
    rows.forEach(function (row, i) { row._order = i; });
    rows.sort(function (a, b) {
      var x = cellValue(a, column), y = cellValue(b, column);
      if (x === "" && y !== "") { return 1; }   /* unknown values last, either way */
      if (y === "" && x !== "") { return -1; }
      var result;
      if (numeric) {
        result = parseFloat(x) - parseFloat(y);
        if (isNaN(result)) { result = 0; }
      } else {
        result = x.localeCompare(y, undefined, { numeric: true, sensitivity: "base" });
      }
      if (!ascending) { result = -result; }
      return result || a._order - b._order;
    });
    var fragment = document.createDocumentFragment();
    rows.forEach(function (row) { fragment.appendChild(row); });
    body.appendChild(fragment);
  }

  function setUpSorting(table) {
    var headers = table.tHead ? table.tHead.rows[0].cells : [];
    Array.prototype.forEach.call(headers, function (th, column) {
      var button = th.querySelector("button.sort-button");
      if (!button) { return; }
      button.addEventListener("click", function () {
        var ascending = th.getAttribute("aria-sort") !== "ascending";
        Array.prototype.forEach.call(headers, function (other) { other.removeAttribute("aria-sort"); });
        th.setAttribute("aria-sort", ascending ? "ascending" : "descending");
        sortTable(table, column, th.getAttribute("data-sort-type") === "number", ascending);
      });
    });
  }

  function setUpFilter(table) {
    var tools = document.querySelector('[data-tools-for="' + table.id + '"]');
    if (!tools) { return; }
    tools.hidden = false;
    var text = tools.querySelector("input[data-filter]");
    var verdict = tools.querySelector("select[data-verdict-filter]");
    var count = tools.querySelector("[data-count]");
    var rows = Array.prototype.slice.call(table.tBodies[0].rows);
    var haystacks = rows.map(function (row) { return row.textContent.toLowerCase(); });
    var lastShown = null;  /* the plots are restyled only when the set of runs changes */

    function apply() {
      var terms = (text ? text.value : "").toLowerCase().split(/\s+/).filter(Boolean);
      var wanted = verdict ? verdict.value : "";
      var shown = {};
      var visible = 0;
      rows.forEach(function (row, i) {
        var ok = terms.every(function (t) { return haystacks[i].indexOf(t) >= 0; });
        if (ok && wanted) {
          ok = (" " + (row.getAttribute("data-verdicts") || "") + " ").indexOf(" " + wanted + " ") >= 0;
        }
        row.hidden = !ok;
        if (ok) { visible += 1; shown[row.getAttribute("data-run-id")] = true; }
      });
      if (count) {
        count.textContent = visible === rows.length ? "Showing all " + rows.length + " runs." :
          "Showing " + visible + " of " + rows.length + " runs.";
      }
      var key = visible === rows.length ? "all" : Object.keys(shown).sort().join("\n");
      if (key !== lastShown && (lastShown !== null || key !== "all")) {
        filterPlots(shown, visible === rows.length);
      }
      if (Object.keys(plots).length) { lastShown = key; }
    }
    if (text) { text.addEventListener("input", apply); }
    if (verdict) { verdict.addEventListener("change", apply); }
    apply();
    return apply;
  }

  /* Hide the overlay traces of runs the table filter leaves out. */
  function filterPlots(shown, all) {
    Object.keys(plots).forEach(function (id) {
      var el = plots[id].el;
      if (!el.data) { return; }
      if (plots[id].runs) {
        plots[id].shown = all ? null : shown;
        window.Plotly.react(el, mergeRuns(plots[id]), el.layout);
        return;
      }
      var indices = [], visible = [];
      el.data.forEach(function (trace, i) {
        if (!trace.meta || !trace.meta.run_id) { return; }
        indices.push(i);
        visible.push(all || shown[trace.meta.run_id] === true);
      });
      if (indices.length) { window.Plotly.restyle(el, { visible: visible }, indices); }
    });
  }

  /* ------------------------------------------------------------------ printing */

  /* A4 and Letter leave about 700 CSS pixels between the margins: plots are laid out for that
     width (legend in a smaller type) and given back their screen layout afterwards. */
  var PRINT_WIDTH = 680, PRINT_HEIGHT = 380;
  var opened = [], printed = [];
  window.addEventListener("beforeprint", function () {
    opened = Array.prototype.filter.call(document.querySelectorAll("details:not([open])"), function (d) {
      d.open = true;
      return true;
    });
    printed = [];
    Object.keys(plots).forEach(function (id) {
      var el = plots[id].el;
      if (!el.layout || typeof window.Plotly === "undefined") { return; }
      var legend = el.layout.legend || {};
      var font = legend.font && legend.font.size;
      printed.push({ el: el, legend: { orientation: legend.orientation, x: legend.x, xanchor: legend.xanchor,
                                       y: legend.y, yanchor: legend.yanchor, "font.size": font } });
      window.Plotly.relayout(el, { width: PRINT_WIDTH, height: PRINT_HEIGHT, "legend.orientation": "v",
                                   "legend.x": 1.02, "legend.xanchor": "left", "legend.y": 1,
                                   "legend.yanchor": "top", "legend.font.size": 9 });
    });
  });
  window.addEventListener("afterprint", function () {
    opened.forEach(function (d) { d.open = false; });
    opened = [];
    printed.forEach(function (item) {
      var update = { width: null, height: null, autosize: true };
      Object.keys(item.legend).forEach(function (k) {
        update["legend." + k] = item.legend[k] === undefined ? null : item.legend[k];
      });
      window.Plotly.relayout(item.el, update);
    });
    printed = [];
  });

  /* ------------------------------------------------------------------ start */

  function start() {
    var tables = document.querySelectorAll("table.sortable");
    Array.prototype.forEach.call(tables, setUpSorting);
    var filters = Array.prototype.map.call(tables, setUpFilter).filter(Boolean);
    setUpPointLinks();
    drawAll().then(function () {
      filters.forEach(function (apply) { apply(); });  /* the plots follow the table's filter */
      document.documentElement.setAttribute("data-site-ready", "true");
    }, function () {
      document.documentElement.setAttribute("data-site-ready", "error");
    });
  }

  if (document.readyState === "loading") {
    document.addEventListener("DOMContentLoaded", start);
  } else {
    start();
  }
})();

// The review page of regionkey: settle each name, keep the decisions in
// local storage, save them as a decisions CSV for `match --decisions`.
(function () {
  "use strict";
  var data = JSON.parse(document.getElementById("page-data").textContent);
  var storeKey = "regionkey-review-" + data.id;
  var cards = data.cards;
  var decisions = {};
  var current = 0;

  function keyOf(c) { return c.name + "\u0001" + c.state + "\u0001" + c.years_cell; }
  function el(tag, attrs, text) {
    var e = document.createElement(tag);
    if (attrs) for (var k in attrs) e.setAttribute(k, attrs[k]);
    if (text !== undefined) e.textContent = text;
    return e;
  }
  var SVG = "http://www.w3.org/2000/svg";
  function sv(tag, attrs, text) {
    var e = document.createElementNS(SVG, tag);
    for (var k in attrs) e.setAttribute(k, attrs[k]);
    if (text !== undefined) e.textContent = text;
    return e;
  }

  // Decisions: the review file's own, then what this browser kept.
  cards.forEach(function (c) { if (c.chosen) decisions[keyOf(c)] = c.chosen; });
  try {
    var kept = JSON.parse(localStorage.getItem(storeKey) || "{}");
    for (var k in kept) decisions[k] = kept[k];
  } catch (e) { /* storage unavailable: decisions last for this visit */ }
  function persist() {
    try { localStorage.setItem(storeKey, JSON.stringify(decisions)); } catch (e) { }
  }

  // Typed codes: a lost leading zero is restored; `+` joins several units.
  function checkCode(text) {
    var parts = text.split("+").map(function (p) { return p.trim(); }).filter(function (p) { return p; });
    if (!parts.length) return { ok: false, msg: "" };
    var out = [], names = [];
    for (var i = 0; i < parts.length; i++) {
      var p = parts[i];
      if (/^\d{4}$/.test(p) && !data.codes[p] && data.codes["0" + p]) p = "0" + p;
      var hit = data.codes[p];
      if (!hit) return { ok: false, msg: "\u2717 " + parts[i] + " is not a code of " + data.codes_label };
      out.push(p);
      names.push(p + " " + hit[0] + (hit[1] ? ", " + hit[1] : "") + (hit[2] ? " (" + hit[2] + ")" : ""));
    }
    out.sort();
    return { ok: true, code: out.join("+"), msg: "\u2713 " + names.join(" + ") };
  }

  function describe(c, code) {
    if (code === "none") return "none: not a unit";
    for (var i = 0; i < c.candidates.length; i++)
      if (c.candidates[i].code === code) return (i + 1) + ": " + code + " " + c.candidates[i].name;
    var hit = data.codes[code];
    return code + (hit ? " " + hit[0] : "");
  }

  var main = document.getElementById("cards");
  var nodes = cards.map(function (c, i) {
    var card = el("article", { "class": "card", "tabindex": "-1", "data-index": String(i) });
    var head = el("div", { "class": "head" });
    head.appendChild(el("h2", null, c.name || "(empty name)"));
    var meta = [];
    if (c.state) meta.push(c.state);
    meta.push(c.rows + (c.rows === 1 ? " row" : " rows"));
    if (c.years) meta.push("years " + c.years.replace(/-/g, "\u2013").replace(/;/g, ", "));
    head.appendChild(el("span", { "class": "meta" }, meta.join(" \u00b7 ")));
    head.appendChild(el("span", { "class": "decision" }));
    card.appendChild(head);
    card.appendChild(el("p", { "class": "reason" }, c.reason));
    card.appendChild(el("p", { "class": "advice" }, c.advice));
    var body = el("div", { "class": "body" });
    var left = el("div");
    var ol = el("ol", { "class": "cands" });
    c.candidates.forEach(function (cand, k) {
      var li = el("li");
      var b = el("button", { "class": "cand", "type": "button", "data-code": cand.code });
      b.appendChild(el("kbd", null, String(k + 1)));
      b.appendChild(el("span", { "class": "code" }, cand.code));
      b.appendChild(el("span", { "class": "name" }, cand.name));
      b.appendChild(el("span", { "class": "score" }, cand.score ? "score " + cand.score : ""));
      if (cand.history.length) {
        var ul = el("ul", { "class": "hist" });
        cand.history.forEach(function (h) { ul.appendChild(el("li", null, h)); });
        b.appendChild(ul);
      }
      if (c.map && !cand.drawn) b.appendChild(el("span", { "class": "undrawn" }, "not on the map (no boundary in the built-in layers)"));
      b.addEventListener("click", function () { choose(i, cand.code); });
      li.appendChild(b);
      ol.appendChild(li);
    });
    left.appendChild(ol);
    var other = el("div", { "class": "other" });
    var none = el("button", { "class": "none", "type": "button" });
    none.appendChild(el("kbd", null, "n"));
    none.appendChild(document.createTextNode(" none: not a unit"));
    none.addEventListener("click", function () { choose(i, "none"); });
    other.appendChild(none);
    var label = el("label", null, "or a code: ");
    var input = el("input", { "class": "code", "type": "text", "inputmode": "numeric", "autocomplete": "off",
      "placeholder": "e.g. 51760", "aria-label": "type a code for " + c.name });
    label.appendChild(input);
    other.appendChild(label);
    var use = el("button", { "class": "use", "type": "button", "disabled": "" }, "Use");
    other.appendChild(use);
    var check = el("span", { "class": "check", "aria-live": "polite" });
    other.appendChild(check);
    var clear = el("button", { "class": "clear", "type": "button" }, "Undo");
    clear.addEventListener("click", function () { choose(i, null); });
    other.appendChild(clear);
    function onType() {
      var r = checkCode(input.value);
      check.textContent = r.msg;
      check.className = "check " + (r.ok ? "ok" : (r.msg ? "bad" : ""));
      if (r.ok) use.removeAttribute("disabled"); else use.setAttribute("disabled", "");
      return r;
    }
    input.addEventListener("input", onType);
    input.addEventListener("keydown", function (ev) {
      if (ev.key === "Enter") { var r = onType(); if (r.ok) { input.blur(); choose(i, r.code); } ev.preventDefault(); }
      if (ev.key === "Escape") { input.blur(); card.focus(); }
      ev.stopPropagation();
    });
    use.addEventListener("click", function () { var r = onType(); if (r.ok) choose(i, r.code); });
    left.appendChild(other);
    if (c.examples.length) {
      var t = el("table", { "class": "examples" });
      t.appendChild(el("caption", null, "Example rows of the table"));
      var tr = el("tr");
      data.example_columns.forEach(function (h) { tr.appendChild(el("th", null, h)); });
      t.appendChild(tr);
      c.examples.forEach(function (row) {
        var r = el("tr");
        row.forEach(function (v) { r.appendChild(el("td", null, v)); });
        t.appendChild(r);
      });
      left.appendChild(t);
    }
    body.appendChild(left);
    if (c.map) body.appendChild(drawMap(c));
    card.appendChild(body);
    card.addEventListener("click", function (ev) { if (current !== i) { setCurrent(i, false); } });
    main.appendChild(card);
    return card;
  });

  function drawMap(c) {
    var base = data.bases[c.map.base];
    var fig = el("figure", { "class": "map" });
    var svg = sv("svg", { viewBox: "0 0 " + base.size[0].toFixed(1) + " " + base.size[1].toFixed(1),
      role: "img", "aria-label": "map of the candidates of " + c.name });
    base.paths.forEach(function (d) { svg.appendChild(sv("path", { "class": "base", d: d })); });
    c.map.marks.forEach(function (m) {
      svg.appendChild(sv("path", { "class": "mark", d: m[1], "fill-rule": "evenodd", "data-n": String(m[0]) }));
    });
    c.map.marks.forEach(function (m) {
      svg.appendChild(sv("circle", { "class": "pin", cx: m[2], cy: m[3], r: 8, "data-n": String(m[0]) }));
      svg.appendChild(sv("text", { "class": "pinlabel", x: m[2], y: m[3], "data-n": String(m[0]) }, String(m[0])));
    });
    fig.appendChild(svg);
    fig.appendChild(el("figcaption", null, base.caption + "; the numbers are the candidates."));
    return fig;
  }

  function render(i) {
    var c = cards[i], node = nodes[i], code = decisions[keyOf(c)];
    node.classList.toggle("decided", !!code);
    node.classList.toggle("is-none", code === "none");
    var d = node.querySelector(".decision");
    d.textContent = code ? "\u2192 " + describe(c, code) : "undecided";
    d.className = "decision" + (code ? (code === "none" ? " none" : " code") : "");
    node.querySelectorAll("button.cand").forEach(function (b, k) {
      var sel = b.getAttribute("data-code") === code;
      b.classList.toggle("sel", sel);
      b.setAttribute("aria-pressed", sel ? "true" : "false");
    });
    node.querySelector("button.none").classList.toggle("sel", code === "none");
    var selN = -1;
    c.candidates.forEach(function (cand, k) { if (cand.code === code) selN = k + 1; });
    node.querySelectorAll("svg [data-n]").forEach(function (s) {
      s.classList.toggle("sel", Number(s.getAttribute("data-n")) === selN);
    });
  }

  function visible(i) {
    var c = cards[i], q = document.getElementById("filter").value.trim().toLowerCase();
    var show = document.getElementById("show").value, done = !!decisions[keyOf(c)];
    if (show === "open" && done) return false;
    if (show === "done" && !done) return false;
    if (!q) return true;
    var hay = [c.name, c.state, c.reason, c.years].concat(c.candidates.map(function (x) { return x.code + " " + x.name; }));
    return hay.join(" ").toLowerCase().indexOf(q) >= 0;
  }

  function refresh() {
    var shown = 0, left = 0, leftRows = 0;
    nodes.forEach(function (n, i) {
      var v = visible(i);
      n.hidden = !v;
      if (v) shown++;
      if (!decisions[keyOf(cards[i])]) { left++; leftRows += cards[i].rows; }
    });
    document.getElementById("count").textContent = left + " of " + cards.length + " names left (" + leftRows +
      (leftRows === 1 ? " row)" : " rows)") + (shown < cards.length ? " \u00b7 " + shown + " shown" : "");
    document.getElementById("empty").hidden = shown > 0;
    if (nodes[current] && nodes[current].hidden) {
      var next = step(current, 1, false);
      if (next === current) next = step(current, -1, false);
      setCurrent(next, false);
    }
  }

  function step(from, dir, undecidedOnly) {
    for (var i = from + dir; i >= 0 && i < cards.length; i += dir) {
      if (nodes[i].hidden) continue;
      if (undecidedOnly && decisions[keyOf(cards[i])]) continue;
      return i;
    }
    return from;
  }

  function setCurrent(i, scroll) {
    if (!nodes[i]) return;
    if (nodes[current]) nodes[current].classList.remove("current");
    current = i;
    nodes[i].classList.add("current");
    if (scroll !== false) {
      nodes[i].scrollIntoView({ block: "nearest" });
      nodes[i].focus({ preventScroll: true });
    }
  }

  function choose(i, code) {
    var k = keyOf(cards[i]);
    if (code) decisions[k] = code; else delete decisions[k];
    persist();
    render(i);
    document.getElementById("saved").textContent = "";
    if (code) {
      var next = step(i, 1, true);
      if (next === i) next = step(i, 1, false);
      setCurrent(next);
    } else {
      setCurrent(i);
    }
    refresh();
  }

  function csvCell(v) {
    v = String(v);
    return /[",\r\n]/.test(v) || /^\s|\s$/.test(v) ? '"' + v.replace(/"/g, '""') + '"' : v;
  }

  // The decisions file: `match --decisions` reads it as it is.
  function decisionsCsv() {
    var head = ["name"];
    if (data.has_state) head.push("state");
    if (data.has_years) head.push("years");
    head.push("chosen_code");
    var lines = [head.join(",")];
    cards.forEach(function (c) {
      var code = decisions[keyOf(c)];
      if (!code) return;
      var row = [c.name];
      if (data.has_state) row.push(c.state);
      if (data.has_years) row.push(c.years_cell);
      row.push(code);
      lines.push(row.map(csvCell).join(","));
    });
    return lines.join("\n") + "\n";
  }
  window.regionkeyDecisionsCsv = decisionsCsv;

  document.getElementById("save").addEventListener("click", function () {
    var text = decisionsCsv();
    var a = el("a", { download: "decisions.csv" });
    a.href = URL.createObjectURL(new Blob([text], { type: "text/csv" }));
    document.body.appendChild(a);
    a.click();
    setTimeout(function () { URL.revokeObjectURL(a.href); a.remove(); }, 1000);
    var n = text.split("\n").length - 2;
    document.getElementById("saved").textContent = "saved decisions.csv (" + n + (n === 1 ? " decision)" : " decisions)");
  });
  document.getElementById("filter").addEventListener("input", refresh);
  document.getElementById("show").addEventListener("change", refresh);

  document.addEventListener("keydown", function (ev) {
    var t = ev.target;
    if (ev.ctrlKey || ev.metaKey || ev.altKey) return;
    if (t && (t.tagName === "INPUT" || t.tagName === "SELECT" || t.tagName === "TEXTAREA")) {
      if (ev.key === "Escape") { t.blur(); if (nodes[current]) nodes[current].focus(); }
      return;
    }
    var c = cards[current];
    var key = ev.key;
    if (key === "j" || key === "ArrowDown" || key === "ArrowRight") setCurrent(step(current, 1, false));
    else if (key === "k" || key === "ArrowUp" || key === "ArrowLeft") setCurrent(step(current, -1, false));
    else if (/^[1-5]$/.test(key) && c && c.candidates[Number(key) - 1]) choose(current, c.candidates[Number(key) - 1].code);
    else if (key === "n" && c) choose(current, "none");
    else if (key === "u" && c) choose(current, null);
    else if (key === "c" && c) nodes[current].querySelector("input.code").focus();
    else if (key === "/") document.getElementById("filter").focus();
    else return;
    ev.preventDefault();
  });

  cards.forEach(function (_, i) { render(i); });
  if (!cards.length) document.getElementById("empty").textContent = "Nothing to settle: the review file has no names.";
  var first = step(-1, 1, true);
  setCurrent(first >= 0 ? first : 0, false);
  refresh();
})();

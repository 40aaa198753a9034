// ferry review: the page's script. It talks only to the server that served it.
"use strict";
(function () {
  const $ = (id) => document.getElementById(id);
  const NS = "http://www.w3.org/2000/svg";
  let state = null, cell = null, place = 0, flick = null;

  async function getJSON(url, opts) {
    const r = await fetch(url, opts);
    if (!r.ok) throw new Error((await r.text()).trim() || r.statusText);
    return r.json();
  }

  function el(name, attrs, parent) {
    const e = document.createElementNS(NS, name);
    for (const k in attrs) e.setAttribute(k, attrs[k]);
    if (parent) parent.appendChild(e);
    return e;
  }

  function fmtP(p) { return p >= 0.9999 ? "1.000" : p.toFixed(3); }

  function showProgress() {
    const box = $("progress");
    box.textContent = "";
    const all = document.createElement("span");
    all.className = "p";
    all.textContent = state.decided + " of " + state.total + " decided, " + (state.total - state.decided) + " left";
    box.appendChild(all);
    for (const p of state.progress) {
      const s = document.createElement("span");
      s.className = "p";
      const m = document.createElement("meter");
      m.max = p.total; m.value = p.decided;
      s.append(p.status + " " + p.decided + "/" + p.total, m);
      box.appendChild(s);
    }
  }

  // Pixel position of an offset (µm) from the cell in a panel.
  function at(dx, dv) {
    const s = cell.pixels / (2 * cell.half_um);
    return [(dx + cell.half_um) * s, (dv + cell.half_um) * s];
  }

  function drawPanel(name) {
    const fig = $(name);
    fig.textContent = "";
    const xy = name.endsWith("xy");
    const img = document.createElement("img");
    img.alt = name;
    img.src = "/api/panel?k=" + place + "&name=" + name;
    fig.appendChild(img);
    if (name.startsWith("em")) {
      const over = document.createElement("img");
      over.className = "over";
      over.alt = "";
      over.src = "/api/panel?k=" + place + "&name=vivo-" + name.slice(3);
      fig.appendChild(over);
    }
    const n = cell.pixels;
    const svg = el("svg", { viewBox: "0 0 " + n + " " + n }, fig);
    const s = n / (2 * cell.half_um);
    // The 95 % radius, as a circle in either plane.
    const c = at(0, 0);
    el("circle", { cx: c[0], cy: c[1], r: cell.r95_um * s, class: "m-r95" }, svg);
    el("line", { x1: c[0] - 4, y1: c[1], x2: c[0] + 4, y2: c[1], class: "m-cell" }, svg);
    el("line", { x1: c[0], y1: c[1] - 4, x2: c[0], y2: c[1] + 4, class: "m-cell" }, svg);
    // Marks within this depth of the plane are drawn full, others faint.
    const depth = Math.max(cell.r95_um, 3);
    for (const nb of cell.neighbours) {
      const off = xy ? nb.dz : nb.dy;
      const p = at(nb.dx, xy ? nb.dy : nb.dz);
      const g = el("g", { class: Math.abs(off) > depth ? "far" : "" }, svg);
      if (nb.accepted_at) {
        const q = at(nb.accepted_at[0], xy ? nb.accepted_at[1] : nb.accepted_at[2]);
        el("line", { x1: p[0], y1: p[1], x2: q[0], y2: q[1], class: "m-link" }, g);
      }
      el("path", { d: "M" + p[0] + " " + (p[1] - 5) + " l5 5 l-5 5 l-5 -5 Z", class: "m-nb" }, g);
      const t = el("text", { x: p[0] + 7, y: p[1] + 12, class: "t-nb" }, g);
      t.textContent = nb.id;
    }
    const r = Math.max(3, 2.5 * s);
    for (const cd of cell.candidates) {
      const off = xy ? cd.dz : cd.dy;
      const p = at(cd.dx, xy ? cd.dy : cd.dz);
      const far = Math.abs(off) > depth;
      const g = el("g", { class: (far ? "far " : "") + "hit", "data-candidate": cd.id }, svg);
      const chosen = cell.decision === "accepted" && cell.decided_candidate === cd.id;
      const cls = cd.taken_by ? "m-taken" : cd.proposed ? "m-proposed" : "m-cand";
      el("rect", { x: p[0] - r, y: p[1] - r, width: 2 * r, height: 2 * r, class: cls }, g);
      if (chosen) el("rect", { x: p[0] - r - 3, y: p[1] - r - 3, width: 2 * r + 6, height: 2 * r + 6, class: "m-chosen" }, g);
      if (!far && (cd.p > 0 || cd.proposed)) {
        const t = el("text", { x: p[0] + r + 2, y: p[1] - r, class: cd.proposed ? "t-proposed" : "t-cand" }, g);
        // How far the nucleus lies off the plane shown, when it is.
        const axis = xy ? "z" : "y";
        const offText = Math.abs(off) >= 1 ? " " + axis + (off > 0 ? "+" : "−") + Math.abs(off).toFixed(1) : "";
        t.textContent = cd.id + " " + fmtP(cd.p) + offText;
      }
      if (!cd.taken_by) g.addEventListener("click", () => decide("accepted", cd.id));
    }
    // Scale bar: a round length near a fifth of the width.
    const w = 2 * cell.half_um / 5;
    const p10 = Math.pow(10, Math.floor(Math.log10(w)));
    let len = p10;
    for (const m of [2, 5, 10]) if (m * p10 <= w) len = m * p10;
    el("rect", { x: 8, y: n - 12, width: len * s, height: 4, fill: "#fff", stroke: "#000", "stroke-width": 1 }, svg);
    const t = el("text", { x: 8, y: n - 16, class: "t-scale" }, svg);
    t.textContent = len + " µm";
    const ax = el("text", { x: n - 8, y: 14, class: "t-scale", "text-anchor": "end" }, svg);
    ax.textContent = xy ? "z " + cell.position_um[2].toFixed(1) + " µm" : "y " + cell.position_um[1].toFixed(1) + " µm";
  }

  function showChoices() {
    const list = $("choices");
    list.textContent = "";
    const ranked = cell.candidates.filter((c) => c.p > 0 || c.proposed).sort((a, b) => b.p - a.p);
    let key = 1;
    const add = (label, p, cls, onPick, disabled, title) => {
      const li = document.createElement("li");
      const b = document.createElement("button");
      b.type = "button";
      b.className = cls;
      b.disabled = !!disabled;
      if (title) b.title = title;
      const k = document.createElement("kbd");
      k.textContent = key <= 9 ? String(key) : "";
      const name = document.createElement("span");
      name.innerHTML = label;
      const pv = document.createElement("span");
      pv.textContent = "p " + fmtP(p);
      const bar = document.createElement("span");
      bar.className = "bar";
      const fill = document.createElement("i");
      fill.style.width = Math.round(100 * p) + "%";
      bar.appendChild(fill);
      b.append(k, name, pv, bar);
      b.addEventListener("click", onPick);
      b.dataset.key = String(key);
      li.appendChild(b);
      list.appendChild(li);
      key++;
    };
    for (const c of ranked) {
      let cls = c.proposed ? "proposed" : "";
      if (cell.decision === "accepted" && cell.decided_candidate === c.id) cls += " chosen";
      add("<code></code>" + (c.proposed ? " proposed" : "") + (c.taken_by ? " (taken by " + "<code></code>" + ")" : ""),
        c.p, cls, () => decide("accepted", c.id), c.taken_by, c.taken_by ? "accepted for another cell" : "");
      const codes = list.lastChild.querySelectorAll("code");
      codes[0].textContent = c.id;
      if (c.taken_by) codes[1].textContent = c.taken_by;
    }
    add("no counterpart", cell.p_none, "none" + (cell.decision === "none" ? " chosen" : ""), () => decide("none", ""));
  }

  function showProposal() {
    const box = $("proposal");
    box.textContent = "";
    const lines = [];
    if (cell.proposed) lines.push(["proposed nucleus ", cell.proposed, ", p " + fmtP(cell.p_match)]);
    else lines.push(["proposed: no counterpart", "", ", p " + fmtP(cell.p_none)]);
    lines.push(["95 % radius " + cell.r95_um.toFixed(1) + " µm, mapping " + cell.mapped_status, "", ""]);
    if (cell.decision) lines.push(["decided: " + (cell.decision === "none" ? "no counterpart" : "nucleus "), cell.decided_candidate, ""]);
    for (const [a, b, c] of lines) {
      const d = document.createElement("div");
      const strong = document.createElement("b");
      strong.textContent = b;
      d.append(a, strong, c);
      box.appendChild(d);
    }
    const ex = $("extra");
    ex.textContent = "";
    if (cell.extra) ex.textContent = Object.entries(cell.extra).map(([k, v]) => k + " " + v).join(" · ");
  }

  async function load(k) {
    $("message").textContent = "";
    if (k >= state.total) {
      $("done").hidden = false;
      k = state.total - 1;
    } else {
      $("done").hidden = true;
    }
    place = Math.max(0, k);
    cell = await getJSON("/api/cell?k=" + place);
    cell.candidates = cell.candidates || [];
    cell.neighbours = cell.neighbours || [];
    document.body.dataset.place = String(place);
    history.replaceState(null, "", "#cell=" + encodeURIComponent(cell.id));
    document.body.dataset.cell = cell.id;
    $("cell-id").textContent = cell.id;
    const st = $("cell-status");
    st.textContent = cell.status;
    st.className = "badge " + cell.status;
    $("place").textContent = (place + 1) + " of " + cell.total;
    $("accept").firstChild.textContent = cell.proposed ? "Accept proposal " : "Accept: no counterpart ";
    for (const n of ["vivo-xy", "em-xy", "vivo-xz", "em-xz"]) drawPanel(n);
    mix();
    showProposal();
    showChoices();
    showProgress();
  }

  async function decide(decision, candidate) {
    try {
      state = await getJSON("/api/decide", {
        method: "POST", headers: { "Content-Type": "application/json" },
        body: JSON.stringify({ id: cell.id, decision: decision, candidate: candidate }),
      });
      await load(place + 1);
    } catch (e) {
      $("message").textContent = "Not saved: " + e.message;
    }
  }

  function mix() {
    const v = $("mix").value / 100;
    for (const o of document.querySelectorAll("img.over")) o.style.opacity = String(v);
  }

  function flicker() {
    if (flick) { clearInterval(flick); flick = null; $("mix").value = 0; mix(); return; }
    flick = setInterval(() => { $("mix").value = $("mix").value > 50 ? 0 : 100; mix(); }, 600);
  }

  $("mix").addEventListener("input", mix);
  $("flicker").addEventListener("click", flicker);
  // Accepting the proposal of an unmatched cell is saying it has no
  // counterpart.
  const acceptProposal = () => cell.proposed ? decide("accepted", cell.proposed) : decide("none", "");
  $("accept").addEventListener("click", acceptProposal);
  $("none").addEventListener("click", () => decide("none", ""));
  $("skip").addEventListener("click", () => load(place + 1));
  $("back").addEventListener("click", () => load(place - 1));
  document.addEventListener("keydown", (e) => {
    if (e.target.tagName === "INPUT" || e.ctrlKey || e.metaKey || e.altKey) return;
    const k = e.key.toLowerCase();
    if (k === "a") acceptProposal();
    else if (k === "n") decide("none", "");
    else if (k === "s" || e.key === "ArrowRight") load(place + 1);
    else if (k === "b" || e.key === "ArrowLeft") load(place - 1);
    else if (k === "f") flicker();
    else if (/^[1-9]$/.test(k)) {
      const b = document.querySelector('#choices button[data-key="' + k + '"]');
      if (b && !b.disabled) b.click();
    }
  });

  (async function start() {
    try {
      state = await getJSON("/api/state");
      // A link to a cell (#cell=ID) opens it; otherwise resume.
      const m = /^#cell=(.+)$/.exec(location.hash);
      const asked = m ? state.order.indexOf(decodeURIComponent(m[1])) : -1;
      await load(asked >= 0 ? asked : state.resume);
    } catch (e) {
      $("message").textContent = "Cannot load: " + e.message;
    }
  })();
})();

// The forecaster page: load or paste a sounding, diagnose it, show the answer and the diagram.
// Plain browser JavaScript, no external assets.
"use strict";

(function () {
  const $ = (id) => document.getElementById(id);

  // One plain-language line per type, so a newcomer knows what the code means on the road.
  const MEANING = {
    FZRA: "Rain that falls as liquid but freezes on contact with the ground, roads, wires and trees: glaze ice.",
    FZDZ: "Fine drizzle that freezes on contact: a thin, hard-to-see glaze.",
    FZRAPL: "Freezing rain mixed with ice pellets: glaze plus bouncing pellets.",
    PL: "Ice pellets: drops that melted aloft and refroze before landing; they bounce and pile up like grit.",
    SN: "Snow: the flakes stay frozen all the way down.",
    RA: "Rain: liquid and the ground is not cold enough to freeze it.",
    DZ: "Drizzle: fine liquid drops from shallow cloud.",
    RASN: "A mix of rain and partly melted snow.",
    RAPL: "Rain with some ice pellets.",
    NONE: "Nothing reaches the ground.",
  };
  const FREEZING = new Set(["FZRA", "FZDZ", "FZRAPL"]);

  let lastBody = null;
  let diagramUrl = null;
  // The opening demo load must never replace what the user already did: any input, paste,
  // upload or run sets userActed, and every run gets a number so a late answer of an older
  // run is dropped instead of shown over a newer one.
  let userActed = false;
  let runCounter = 0;
  const OPTIONS_KEY = "ptype.options";
  const OPTION_FIELDS = ["opt-members", "opt-wetbulb", "opt-seed"];

  function saveOptions() {
    const values = {};
    for (const id of OPTION_FIELDS) values[id] = $(id).value;
    try { localStorage.setItem(OPTIONS_KEY, JSON.stringify(values)); } catch (e) { /* private mode */ }
  }

  function restoreOptions() {
    let values = null;
    try { values = JSON.parse(localStorage.getItem(OPTIONS_KEY) || "null"); } catch (e) { values = null; }
    if (!values) return;
    for (const id of OPTION_FIELDS) {
      if (typeof values[id] === "string") $(id).value = values[id];
    }
  }

  function clearResult() {
    // A new run first removes the previous answer, so it can never be read as this one's.
    $("result").hidden = true;
    $("verdict-code").textContent = "";
    $("verdict-code").className = "verdict-code";
    $("explanation").innerHTML = "";
    $("bars").innerHTML = "";
    $("methods-body").innerHTML = "";
    const img = $("diagram");
    img.hidden = true;
    img.removeAttribute("src");
  }

  function showEmptyState(show) { $("empty-state").hidden = !show; }

  function setStatus(text) { $("status").textContent = text; }

  function showError(message) {
    const box = $("error");
    box.textContent = message;
    box.hidden = !message;
  }

  function contentType(text) {
    const head = text.trimStart();
    if (head.startsWith("{") || head.startsWith("[")) return "application/json";
    return "text/plain";  // the server tells CSV from WMO TEMP
  }

  let runSeed = null;

  function query() {
    const params = new URLSearchParams();
    const members = $("opt-members").value.trim();
    if (members !== "") params.set("members", members);
    // One seed per run (the user's, or a fresh random one) so the diagram's probabilities
    // match the bars of the diagnosis shown.
    const seed = $("opt-seed").value.trim();
    params.set("seed", seed !== "" ? seed : String(runSeed));
    params.set("wetbulb", $("opt-wetbulb").value);
    return params;
  }

  async function errorMessage(response) {
    try {
      const body = await response.json();
      if (body && body.error) {
        return body.error.message + (body.error.field ? " (field: " + body.error.field + ")" : "");
      }
    } catch (e) { /* not JSON */ }
    return "The server answered " + response.status + ".";
  }

  async function loadDemoList() {
    const select = $("demo-select");
    try {
      const response = await fetch("/v1/demo");
      const body = await response.json();
      select.innerHTML = "";
      const placeholder = new Option("Choose a demo sounding…", "");
      select.add(placeholder);
      for (const entry of body.soundings) {
        select.add(new Option(entry.title, entry.name));
      }
      if (!body.soundings.length) placeholder.textContent = "No demo soundings installed";
      return body.soundings;
    } catch (e) {
      select.innerHTML = "";
      select.add(new Option("Demo list unavailable", ""));
      return [];
    }
  }

  async function loadDemo(opening) {
    const name = $("demo-select").value;
    if (!name) { showError("Choose a demo sounding first."); $("demo-select").focus(); return; }
    if (!opening) userActed = true;
    showError("");
    setStatus("Loading " + name + "…");
    const response = await fetch("/v1/demo/" + encodeURIComponent(name));
    if (opening && userActed) { setStatus(""); return; }  // the user got there first
    if (!response.ok) { showError(await errorMessage(response)); setStatus(""); return; }
    binaryBody = null;
    const text = await response.text();
    if (opening && userActed) { setStatus(""); return; }
    $("profile-text").value = text;
    await diagnose(opening);
  }

  async function openWithLatestDemo() {
    // The page opens useful: the most recent demo sounding, diagnosed, unless the user has
    // already started; with no demo installed the empty state explains the three ways in.
    const soundings = await loadDemoList();
    if (userActed || !soundings.length) return;
    const latest = soundings.reduce((a, b) => ((b.valid_time || "") > (a.valid_time || "") ? b : a));
    $("demo-select").value = latest.name;
    await loadDemo(true);
  }

  function readFile(file) {
    return new Promise((resolve, reject) => {
      const reader = new FileReader();
      reader.onload = () => resolve(reader.result);
      reader.onerror = () => reject(reader.error);
      reader.readAsText(file);
    });
  }

  // A binary upload (WMO BUFR) is kept as bytes and sent as they are; the text box only
  // shows a note about it until the user types there.
  let binaryBody = null;

  async function readUpload(file) {
    const head = new Uint8Array(await file.slice(0, 200).arrayBuffer());
    const marker = String.fromCharCode.apply(null, head);
    if (marker.indexOf("BUFR") >= 0) {
      binaryBody = { text: await file.arrayBuffer(), type: "application/x-bufr" };
      return "WMO BUFR file " + file.name + " (" + file.size + " bytes): sent as it is.";
    }
    binaryBody = null;
    return readFile(file);
  }

  async function diagnose(opening) {
    const text = $("profile-text").value;
    if (!opening) userActed = true;
    if (!text.trim()) {
      clearResult();
      showError("Paste, upload or load a sounding first.");
      $("profile-text").focus();
      return;
    }
    const run = ++runCounter;
    clearResult();
    showEmptyState(false);
    showError("");
    setStatus("Diagnosing…");
    $("diagnose-button").disabled = true;
    saveOptions();
    const body = binaryBody || { text: text, type: contentType(text) };
    runSeed = Math.floor(Math.random() * 2147483647);
    try {
      const response = await fetch("/v1/diagnose?" + query(), {
        method: "POST", headers: { "Content-Type": body.type }, body: body.text,
      });
      if (run !== runCounter) return;  // a newer run started meanwhile
      if (!response.ok) {
        showError(await errorMessage(response));
        setStatus("");
        return;
      }
      const result = await response.json();
      if (run !== runCounter) return;
      lastBody = body;
      render(result);
      setStatus("Diagnosis ready: " + result.ptype_label + " (" + result.ptype + ").");
      if (!opening) $("result-heading").focus();
      await loadDiagram(result, run);
    } catch (e) {
      showError("Could not reach the server: " + e.message);
      setStatus("");
    } finally {
      $("diagnose-button").disabled = false;
    }
  }

  async function loadDiagram(result, run) {
    const img = $("diagram");
    const params = query();
    params.set("format", "svg");
    const response = await fetch("/v1/diagram?" + params, {
      method: "POST", headers: { "Content-Type": lastBody.type }, body: lastBody.text,
    });
    if (!response.ok || run !== runCounter) { img.hidden = run === runCounter ? true : img.hidden; return; }
    const blob = await response.blob();
    if (run !== runCounter) return;
    if (diagramUrl) URL.revokeObjectURL(diagramUrl);
    diagramUrl = URL.createObjectURL(blob);
    img.src = diagramUrl;
    img.alt = "Skew-T log-p diagram of the sounding; consensus " + result.ptype_label +
      ". " + result.explanation.join(" ");
    img.hidden = false;
  }

  function el(tag, attrs, text) {
    const node = document.createElement(tag);
    for (const [k, v] of Object.entries(attrs || {})) node.setAttribute(k, v);
    if (text !== undefined) node.textContent = text;
    return node;
  }

  // The particle model's mass fractions at the ground, as one stacked bar: each part wears
  // the colour and pattern of the type it stands for (snow SN, melting snow RASN, liquid RA,
  // refrozen PL) and carries its name and share in the legend, so colour is never the only cue.
  const FRACTION_PARTS = [["snow", "snow", "SN"], ["melting", "melting snow", "RASN"],
                          ["liquid", "liquid", "RA"], ["refrozen", "refrozen ice", "PL"]];

  function renderFractions(result) {
    const particles = (result.methods || {}).particles;
    const fractions = particles && particles.mass_fractions;
    $("fractions-block").hidden = !fractions;
    const bar = $("fractions");
    const legend = $("fractions-legend");
    bar.innerHTML = "";
    legend.innerHTML = "";
    if (!fractions) return;
    const words = [];
    for (const [key, label, code] of FRACTION_PARTS) {
      const pct = Math.round((fractions[key] || 0) * 100);
      words.push(label + " " + pct + " %");
      legend.appendChild(el("li", {}, label + ": " + pct + " %"));
      if (pct <= 0) continue;
      const part = el("span", { class: "fraction ty-" + code, title: label + " " + pct + " %" },
                      pct >= 12 ? label : "");
      part.style.width = pct + "%";
      bar.appendChild(part);
    }
    bar.setAttribute("aria-label", "Mass at the ground: " + words.join(", "));
  }

  function render(result) {
    $("result").hidden = false;
    const code = $("verdict-code");
    code.textContent = result.ptype;
    code.className = "verdict-code ty-" + result.ptype;  // the type's colour and pattern
    $("verdict").className = "verdict" + (FREEZING.has(result.ptype) ? " verdict-freezing" : "");
    $("verdict-label").textContent = result.ptype_label.charAt(0).toUpperCase() + result.ptype_label.slice(1);
    const where = [];
    if (result.site && (result.site.name || result.site.id)) where.push(result.site.name || result.site.id);
    if (result.valid_time) where.push(result.valid_time.replace("T", " "));
    where.push(result.confidence + " confidence");
    $("verdict-meta").textContent = where.join(" · ");
    $("verdict-meaning").textContent = (FREEZING.has(result.ptype) ? "Hazard: " : "") + (MEANING[result.ptype] || "");

    const list = $("explanation");
    list.innerHTML = "";
    for (const sentence of result.explanation) list.appendChild(el("li", {}, sentence));

    const bars = $("bars");
    bars.innerHTML = "";
    const probs = Object.entries(result.probabilities).sort((a, b) => b[1] - a[1]);
    for (const [type, p] of probs) {
      const pct = Math.round(p * 100);
      const li = el("li", { class: "bar" + (type === result.ptype ? " bar-top" : "") });
      li.appendChild(el("span", { class: "bar-name" }, type));
      const track = el("span", { class: "bar-track", role: "meter", "aria-valuemin": "0",
        "aria-valuemax": "100", "aria-valuenow": String(pct), "aria-label": "Probability of " + type });
      const fill = el("span", { class: "bar-fill ty-" + type });
      fill.style.width = Math.max(pct, p > 0 ? 1 : 0) + "%";
      track.appendChild(fill);
      li.appendChild(track);
      li.appendChild(el("span", { class: "bar-value" }, pct + " %"));
      bars.appendChild(li);
    }

    renderFractions(result);

    const tbody = $("methods-body");
    tbody.innerHTML = "";
    for (const [name, m] of Object.entries(result.methods)) {
      const tr = el("tr");
      const th = el("th", { scope: "row" }, m.title || name);
      tr.appendChild(th);
      tr.appendChild(el("td", { class: "type-cell" }, m.ptype || "no decision"));
      const steps = m.steps || [];
      const last = steps.length ? steps[steps.length - 1] : null;
      const cell = el("td");
      if (last) {
        cell.appendChild(el("code", {}, last.rule));
        cell.appendChild(el("span", { class: "rule-text" }, " " + last.text));
      } else {
        cell.textContent = "—";
      }
      tr.appendChild(cell);
      tr.appendChild(el("td", { class: "ref" }, m.reference || ""));
      tbody.appendChild(tr);
    }

    const warnings = $("warnings");
    warnings.innerHTML = "";
    if (result.warnings && result.warnings.length) {
      warnings.appendChild(el("h3", {}, "Input notes"));
      const ul = el("ul");
      for (const w of result.warnings) ul.appendChild(el("li", {}, w));
      warnings.appendChild(ul);
      warnings.hidden = false;
    } else {
      warnings.hidden = true;
    }
    $("caution").textContent = result.caution;
  }

  document.addEventListener("DOMContentLoaded", () => {
    restoreOptions();
    for (const id of OPTION_FIELDS) $(id).addEventListener("change", saveOptions);
    $("profile-text").addEventListener("input", () => { userActed = true; });
    $("demo-select").addEventListener("change", () => { userActed = true; });
    $("demo-load").addEventListener("click", () => loadDemo(false));
    $("demo-select").addEventListener("keydown", (ev) => {
      if (ev.key === "Enter") { ev.preventDefault(); loadDemo(false); }
    });
    openWithLatestDemo();
    $("profile-file").addEventListener("change", async (ev) => {
      const file = ev.target.files[0];
      if (!file) return;
      userActed = true;
      try {
        $("profile-text").value = await readUpload(file);
        setStatus("Read " + file.name + ".");
      } catch (e) {
        showError("Could not read the file: " + e.message);
      }
    });
    $("profile-text").addEventListener("input", () => { binaryBody = null; });
    $("sounding-form").addEventListener("submit", (ev) => { ev.preventDefault(); diagnose(false); });
  });
})();

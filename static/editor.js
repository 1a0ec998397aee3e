// Plan editor enhancements. The form works without this file; it adds and removes table rows in place,
// keeps the cable and device class figures visible as placeholders, and re-shows units on change.
(function () {
  "use strict";
  document.documentElement.classList.add("has-js");
  const form = document.getElementById("editor");
  if (!form) return;

  // Three significant digits, no exponent, narrow spaces between thousands (as the server writes numbers).
  function readable(value) {
    const rounded = Number(value.toPrecision(3));
    const text = Math.abs(rounded) >= 10000 ? rounded.toLocaleString("en-US", { maximumFractionDigits: 0 }) : String(rounded);
    return text.split(",").join("\u202f");
  }

  function renumber(tbody) {
    tbody.querySelectorAll("tr.row").forEach(function (row, i) {
      const cell = row.querySelector(".rownum");
      if (cell) cell.textContent = String(i + 1);
    });
  }

  function nextIndex(tbody, group) {
    let max = -1;
    tbody.querySelectorAll("[name^='" + group + ".']").forEach(function (el) {
      const n = parseInt(el.name.split(".")[1], 10);
      if (n > max) max = n;
    });
    return max + 1;
  }

  function addRemoveButton(row) {
    const box = row.querySelector("td.remove input[type=checkbox]");
    if (!box || row.querySelector("button.remove-row")) return;
    const button = document.createElement("button");
    button.type = "button";
    button.className = "small quiet remove-row";
    button.textContent = "Remove";
    button.addEventListener("click", function () {
      const tbody = row.parentElement;
      const values = row.nextElementSibling;
      if (values && values.classList.contains("device-row")) values.remove();
      row.remove();
      renumber(tbody);
      form.dispatchEvent(new Event("input"));  // the draft and the live verdict follow
    });
    box.closest("label").hidden = true;
    box.closest("td").appendChild(button);
  }

  document.querySelectorAll("table.rows tr.row").forEach(addRemoveButton);

  document.querySelectorAll("[data-add-row]").forEach(function (button) {
    button.addEventListener("click", function (event) {
      event.preventDefault();
      const tableId = button.getAttribute("data-add-row");
      const group = {
        "node-rows": "nodes",
        "termination-rows": "terminations",
        "bias-rows": "bias",
        "branch-rows": "branches",
        "probe-rows": "probes",
      }[tableId];
      const row = addRow(tableId, group, nextIndex(document.getElementById(tableId).tBodies[0], group));
      saveDraft();
      const first = row.querySelector("input[type=text]");
      if (first) first.focus();
    });
  });

  const defaults = JSON.parse(document.getElementById("class-defaults").textContent);
  function syncPlaceholders(group, selectName) {
    const select = form.elements[selectName];
    if (!select) return;
    const apply = function () {
      const values = defaults[group][select.value] || {};
      Object.keys(defaults[group][Object.keys(defaults[group])[0]] || {}).forEach(function (key) {
        const input = form.elements[group + "." + key];
        if (input) input.placeholder = values[key] || "";
      });
    };
    select.addEventListener("change", apply);
  }
  syncPlaceholders("cable", "cable.class_key");

  // A device's value inputs show the figures of the class its picker names (blank: the plan's default class).
  function syncDevice(prefix) {
    const select = form.elements[prefix + ".class_key"];
    if (!select) return;
    const key = select.value || (form.elements["default_device"] || {}).value;
    const values = defaults.device[key] || {};
    form.querySelectorAll("input[name^='" + prefix + ".']").forEach(function (input) {
      input.placeholder = values[input.name.slice(prefix.length + 1)] || "";
    });
  }
  form.addEventListener("change", function (event) {
    const name = event.target.name || "";
    if (name === "default_device") {
      form.querySelectorAll("select[name$='device.class_key']").forEach(function (select) {
        syncDevice(select.name.slice(0, -".class_key".length));
      });
    } else if (/device\.class_key$/.test(name)) {
      syncDevice(name.slice(0, -".class_key".length));
    }
  });

  // Live sketch: trunk, nodes, driver and terminators placed by the positions typed so far.
  const preview = document.getElementById("live-preview");
  const SVG = "http://www.w3.org/2000/svg";
  function lengthValue(text) {
    const m = /^\s*([-+]?\d*\.?\d+(?:e[-+]?\d+)?)\s*(m|ft|km)?\s*$/i.exec(text || "");
    if (!m) return NaN;
    const n = parseFloat(m[1]);
    // Everything in the display unit: bare numbers already are; "m", "km" and "ft" are converted.
    const metres = { m: 1, km: 1000, ft: 0.3048 }[(m[2] || preview.dataset.unit).toLowerCase()] * n;
    return preview.dataset.unit === "ft" ? metres / 0.3048 : metres;
  }
  function shape(tag, attrs, text) {
    const el = document.createElementNS(SVG, tag);
    Object.keys(attrs).forEach(function (k) { el.setAttribute(k, attrs[k]); });
    if (text) el.textContent = text;
    preview.appendChild(el);
  }
  function drawPreview() {
    if (!preview) return;
    while (preview.firstChild) preview.removeChild(preview.firstChild);
    const length = lengthValue(form.elements["trunk_length_m"].value);
    if (!(length > 0)) {
      shape("text", { x: 20, y: 40 }, "Type a trunk length to see the sketch.");
      return;
    }
    const x0 = 40, x1 = 900;
    const x = function (p) { return x0 + (x1 - x0) * p / length; };
    shape("line", { x1: x0, y1: 34, x2: x1, y2: 34, class: "trunk" });
    shape("text", { x: x0, y: 80 }, "0");
    shape("text", { x: x1, y: 80, "text-anchor": "end" }, readable(length) + " " + preview.dataset.unit);
    // A node on a branch is sketched at its branch's junction on the trunk.
    const junctions = {};
    form.querySelectorAll("input[name^='branches.'][name$='.name']").forEach(function (input) {
      const at = form.elements[input.name.slice(0, -".name".length) + ".junction_position_m"];
      if (input.value.trim() && at) junctions[input.value.trim()] = lengthValue(at.value);
    });
    form.querySelectorAll("input[name$='.position_m']").forEach(function (input) {
      const branch = form.elements[input.name.slice(0, -".position_m".length) + ".branch"];
      const onBranch = input.name.indexOf("nodes.") === 0 && branch && branch.value.trim();
      const p = onBranch ? junctions[branch.value.trim()] : lengthValue(input.value);
      if (isNaN(p)) return;
      const outside = p < 0 || p > length;
      const px = x(Math.min(Math.max(p, 0), length));
      if (input.name.indexOf("terminations.") === 0) {
        shape("line", { x1: px, y1: 22, x2: px, y2: 34, class: "term" });
      } else if (input.name === "driver.position_m") {
        shape("path", { d: "M" + (px - 6) + ",12 L" + (px + 6) + ",12 L" + px + ",26 Z", class: "node" });
      } else if (input.name.indexOf("nodes.") === 0) {
        shape("circle", { cx: px, cy: 48, r: 5, class: outside ? "bad" : "node" });
      }
    });
  }
  form.addEventListener("input", drawPreview);
  drawPreview();

  // --- Drafts survive Back and reload: every input is kept in this tab's session storage and put back,
  // rows added or removed in place included, when the browser shows this page again without its state.
  const draftKey = "pairline-draft:" + location.pathname + location.search;
  function rowIndices(group) {
    const seen = {};
    form.querySelectorAll("[name^='" + group + ".']").forEach(function (el) {
      const part = el.name.split(".")[1];
      if (/^\d+$/.test(part)) seen[part] = true;
    });
    return Object.keys(seen).map(Number).sort(function (a, b) { return a - b; });
  }
  function saveDraft() {
    const values = {};
    const checked = [];
    Array.prototype.forEach.call(form.elements, function (el) {
      if (!el.name || el.type === "file" || el.type === "submit" || el.name.indexOf("__i__") >= 0) return;
      if (el.type === "checkbox" || el.type === "radio") {
        if (el.checked) checked.push(el.name + "=" + el.value);
      } else {
        values[el.name] = el.value;
      }
    });
    const draft = {
      values: values, checked: checked,
      nodes: rowIndices("nodes"), terminations: rowIndices("terminations"), bias: rowIndices("bias"),
      branches: rowIndices("branches")
    };
    try { sessionStorage.setItem(draftKey, JSON.stringify(draft)); } catch (e) { /* storage full or off */ }
  }
  function addRow(tableId, group, index) {
    const tbody = document.getElementById(tableId).tBodies[0];
    const template = document.getElementById(tableId + "-template");
    tbody.insertAdjacentHTML("beforeend", template.innerHTML.split("__i__").join(String(index)));
    const row = tbody.lastElementChild;
    addRemoveButton(row);
    renumber(tbody);
    return row;
  }
  function restoreDraft() {
    let draft = null;
    try { draft = JSON.parse(sessionStorage.getItem(draftKey) || "null"); } catch (e) { draft = null; }
    if (!draft) return;
    [["node-rows", "nodes"], ["termination-rows", "terminations"], ["bias-rows", "bias"], ["branch-rows", "branches"]]
      .forEach(function (pair) {
      const wanted = draft[pair[1]] || [];
      const present = rowIndices(pair[1]);
      const tbody = document.getElementById(pair[0]).tBodies[0];
      present.forEach(function (i) {
        if (wanted.indexOf(i) < 0) {
          const el = form.elements[pair[1] + "." + i + ".name"] || form.elements[pair[1] + "." + i + ".position_m"];
          if (!el) return;
          const row = el.closest("tr");
          const values = row.nextElementSibling;
          if (values && values.classList.contains("device-row")) values.remove();
          row.remove();
        }
      });
      wanted.forEach(function (i) { if (present.indexOf(i) < 0) addRow(pair[0], pair[1], i); });
      renumber(tbody);
    });
    Array.prototype.forEach.call(form.elements, function (el) {
      if (!el.name || el.type === "file" || el.type === "submit") return;
      if (el.type === "checkbox" || el.type === "radio") {
        el.checked = draft.checked.indexOf(el.name + "=" + el.value) >= 0;
      } else if (Object.prototype.hasOwnProperty.call(draft.values, el.name)) {
        el.value = draft.values[el.name];
      }
    });
  }
  const navigation = (performance.getEntriesByType && performance.getEntriesByType("navigation")[0]) || {};
  if (navigation.type === "back_forward" || navigation.type === "reload") {
    restoreDraft();
    drawPreview();
  }
  form.addEventListener("input", saveDraft);
  form.addEventListener("change", saveDraft);
  window.addEventListener("pagehide", saveDraft);

  // --- A table pasted into a node cell goes to the node-table reader, which fills the rows.
  const pasteBox = document.getElementById("f-node_table");
  const pasteButton = document.getElementById("paste-button");
  document.getElementById("node-rows").addEventListener("paste", function (event) {
    const text = (event.clipboardData || window.clipboardData).getData("text");
    if (!pasteBox || !pasteButton || !/[\t\n]/.test(text.trim())) return;
    event.preventDefault();
    pasteBox.value = text;
    pasteButton.click();
  });

  // --- Live verdict: the JSON API checks what is typed so far, a moment after typing stops.
  const live = document.getElementById("live-verdict");
  let sequence = 0;
  let timer = null;
  function liveFields() {
    const fields = {};
    Array.prototype.forEach.call(form.elements, function (el) {
      if (!el.name || el.type === "file" || el.type === "submit" || el.name.indexOf("__i__") >= 0) return;
      if (el.name === "node_table" || el.name === "node_table_replace") return;
      if ((el.type === "checkbox" || el.type === "radio") && !el.checked) return;
      fields[el.name] = el.value;
    });
    return fields;
  }
  function showLive(state, pill, text, loads, spare) {
    live.dataset.state = state;
    const pillEl = document.getElementById("live-pill");
    pillEl.className = "pill" + (state === "checked" ? " verdict-" + pill.verdict : "");
    pillEl.textContent = pill.text;
    document.getElementById("live-text").textContent = text;
    document.getElementById("live-unit-loads").textContent = loads;
    document.getElementById("live-spare").textContent = spare;
  }
  function checkLive() {
    const mine = ++sequence;
    live.dataset.state = "checking";
    fetch("/api/check", {
      method: "POST",
      headers: { "Content-Type": "application/json", "Accept": "application/json" },
      body: JSON.stringify({ form: liveFields() })
    }).then(function (resp) {
      return resp.json().then(function (body) { return { status: resp.status, body: body }; });
    }).then(function (answer) {
      if (mine !== sequence) return;  // a later check is on its way
      const body = answer.body;
      if (answer.status === 200) {
        const deciding = (body.problems || []).slice(0, 3).map(function (f) {
          return f.rule_id + (f.node ? " at " + f.node : "");
        });
        const why = deciding.length ? " Decided by " + deciding.join(", ") + "." : "";
        showLive("checked", { verdict: body.verdict, text: body.verdict_text }, body.counts_text + "." + why,
          body.capacity.unit_loads_text, body.capacity.more_text);
      } else if (answer.status === 422) {
        const problems = body.problems || [];
        const first = problems.length ? problems[0].message : "";
        const count = problems.length === 1 ? "1 value" : problems.length + " values";
        showLive("incomplete", { text: "not checked yet" }, count + " to fix before a verdict. " + first, "—", "—");
      } else {
        showLive("failed", { text: "not checked" }, "The check did not answer (" + answer.status + "); Check still works.", "—", "—");
      }
    }).catch(function () {
      if (mine === sequence) showLive("failed", { text: "not checked" }, "No answer from the planner; Check still works.", "—", "—");
    });
  }
  function scheduleLive(event) {
    if (!live || (event && event.target && (event.target.name === "node_table" || event.target.type === "file"))) return;
    clearTimeout(timer);
    timer = setTimeout(checkLive, 300);
  }
  if (live) {
    form.addEventListener("input", scheduleLive);
    form.addEventListener("change", scheduleLive);
    scheduleLive();
  }

  form.querySelectorAll("input[name=display_units]").forEach(function (radio) {
    radio.addEventListener("change", function () {
      const action = document.createElement("input");
      action.type = "hidden";
      action.name = "action";
      action.value = "units";
      form.appendChild(action);
      form.submit();
    });
  });
})();

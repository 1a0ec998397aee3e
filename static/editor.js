// Plan editor enhancements. The form works without this file; it adds and removes table rows in place,
// keeps the cable and driver class figures visible as placeholders, and re-shows units on change.
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
      row.remove();
      renumber(tbody);
    });
    box.closest("label").hidden = true;
    box.closest("td").appendChild(button);
  }

  document.querySelectorAll("table.rows tr.row").forEach(addRemoveButton);

  document.querySelectorAll("[data-add-row]").forEach(function (button) {
    button.addEventListener("click", function (event) {
      event.preventDefault();
      const tableId = button.getAttribute("data-add-row");
      const table = document.getElementById(tableId);
      const template = document.getElementById(tableId + "-template");
      const tbody = table.tBodies[0];
      const group = tableId === "node-rows" ? "nodes" : "terminations";
      const index = nextIndex(tbody, group);
      const html = template.innerHTML.split("__i__").join(String(index));
      tbody.insertAdjacentHTML("beforeend", html);
      const row = tbody.lastElementChild;
      addRemoveButton(row);
      renumber(tbody);
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
  syncPlaceholders("driver", "driver.transceiver");

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
    form.querySelectorAll("input[name$='.position_m']").forEach(function (input) {
      const p = lengthValue(input.value);
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

// Plan editor enhancements. The form works without this file; it adds and removes table rows in place,
// keeps the cable and driver class figures visible as placeholders, and re-shows units on change.
(function () {
  "use strict";
  document.documentElement.classList.add("has-js");
  const form = document.getElementById("editor");
  if (!form) return;

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

// The procedure editor in the page: add, remove and move rows without a round trip, and refresh the
// check panel (masses, findings, scale-up preview) a moment after the last change. Without this file
// the same buttons are submit buttons the server handles.
(function () {
  "use strict";
  var form = document.querySelector("form.editor");
  var panel = document.getElementById("live");
  if (!form || !panel || !window.fetch || !window.FormData) { return; }
  var ROW = /\b(steps|draws|waste)-(\d+|__i__)-/g;
  var BUTTON = /^(up|down|remove)-(step|draw|waste)-(\d+|__i__)$/;
  var ATTRS = ["id", "name", "for", "aria-describedby"];

  function renumber(tbody) {
    var rows = tbody.querySelectorAll("tr[data-row]");
    rows.forEach(function (row, i) {
      row.querySelectorAll("*").forEach(function (el) {
        ATTRS.forEach(function (attr) {
          var value = el.getAttribute(attr);
          if (value) { el.setAttribute(attr, value.replace(ROW, "$1-" + i + "-").replace(BUTTON, "$1-$2-" + i)); }
        });
        if (el.tagName === "BUTTON" && BUTTON.test(el.value)) { el.value = el.value.replace(BUTTON, "$1-$2-" + i); }
        if (el.classList.contains("n")) { el.textContent = String(i + 1); }
      });
    });
  }

  function firstField(row) { return row && row.querySelector("input, select, textarea"); }

  form.addEventListener("click", function (event) {
    var button = event.target.closest("button[name=action]");
    if (!button) { return; }
    var add = /^add-(step|draw|waste)$/.exec(button.value);
    var move = BUTTON.exec(button.value);
    if (!add && !move) { return; }  // check and save go to the server
    event.preventDefault();
    var table = form.querySelector('table[data-noun="' + (add ? add[1] : move[2]) + '"]');
    var tbody = table.tBodies[0];
    var row, focus;
    if (add) {
      var template = document.getElementById("template-" + table.dataset.rows);
      tbody.appendChild(template.content.cloneNode(true));
      renumber(tbody);
      focus = firstField(tbody.rows[tbody.rows.length - 1]);
    } else {
      row = button.closest("tr");
      var verb = move[1];
      if (verb === "remove") {
        var next = row.nextElementSibling || row.previousElementSibling;
        row.remove();
        renumber(tbody);
        focus = firstField(next) || document.getElementById("add-" + move[2]);
      } else {
        var other = verb === "up" ? row.previousElementSibling : row.nextElementSibling;
        if (other) { tbody.insertBefore(verb === "up" ? row : other, verb === "up" ? other : row); }
        renumber(tbody);
        focus = row.querySelector('button[value^="' + verb + '-"]');
      }
    }
    if (focus) { focus.focus(); }
    schedule();
  });

  // Typing a label or substance picks the option; show the chosen record's text beside the box.
  form.addEventListener("input", function (event) {
    var box = event.target;
    if (box.list && box.id && /-source$/.test(box.id)) {
      var name = document.getElementById(box.id + "-name");
      var option = Array.prototype.find.call(box.list.options, function (o) { return o.value === box.value; });
      if (name) { name.textContent = option ? option.label : ""; }
    }
    schedule();
  });
  form.addEventListener("change", schedule);

  var timer = null, sent = 0;
  function schedule() {
    clearTimeout(timer);
    timer = setTimeout(check, 700);
  }

  function check() {
    var ticket = ++sent;
    var data = new FormData(form);
    data.delete("action");
    panel.setAttribute("aria-busy", "true");
    fetch(form.dataset.check, {method: "POST", body: data, credentials: "same-origin",
                               headers: {"Accept": "text/html"}})
      .then(function (response) {
        if (response.status !== 200 && response.status !== 422) { throw new Error(String(response.status)); }
        return response.text();
      })
      .then(function (html) { if (ticket === sent) { panel.innerHTML = html; } })
      .catch(function () {
        if (ticket === sent) {
          var note = panel.querySelector(".check-status") || panel.appendChild(document.createElement("p"));
          note.className = "check-status field-error";
          note.textContent = "The check could not run just now; press “Check masses and findings” to try again.";
        }
      })
      .then(function () { if (ticket === sent) { panel.removeAttribute("aria-busy"); } });
  }
}());

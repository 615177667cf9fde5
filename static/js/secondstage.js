/* Progressive enhancement only: every page works with scripts off.
   The upload drop zone accepts a file dropped anywhere inside it (the file
   input alone already accepts drops) and names the chosen file. In a
   presentation, the arrow keys follow the previous and next links. A form
   that saves as it is typed in (data-autosave) says so beside its button when
   the server refuses a save or cannot be reached; what was typed stays in
   the field. */
(function () {
  "use strict";

  function enhanceDropzone(zone) {
    var input = zone.querySelector('input[type="file"]');
    var chosen = zone.querySelector("[data-chosen]");
    if (!input) {
      return;
    }
    function showChoice() {
      if (chosen) {
        chosen.textContent = input.files.length ? "Chosen: " + input.files[0].name : "";
      }
    }
    ["dragenter", "dragover"].forEach(function (name) {
      zone.addEventListener(name, function (event) {
        event.preventDefault();
        zone.classList.add("dragging");
      });
    });
    ["dragleave", "drop"].forEach(function (name) {
      zone.addEventListener(name, function () {
        zone.classList.remove("dragging");
      });
    });
    zone.addEventListener("drop", function (event) {
      event.preventDefault();
      if (event.dataTransfer && event.dataTransfer.files.length) {
        input.files = event.dataTransfer.files;
        showChoice();
      }
    });
    input.addEventListener("change", showChoice);
  }

  function stepWithKeys(presentation) {
    document.addEventListener("keydown", function (event) {
      if (event.altKey || event.ctrlKey || event.metaKey || event.target.closest("input, textarea, select")) {
        return;
      }
      var rel = { ArrowRight: "next", PageDown: "next", ArrowLeft: "prev", PageUp: "prev" }[event.key];
      var link = rel && presentation.querySelector('a[rel="' + rel + '"]');
      if (link) {
        event.preventDefault();
        window.location.assign(link.href);
      }
    });
  }

  function refusedSave(form, reason) {
    var status = form.querySelector('[id^="saved-"]');
    if (status) {
      status.textContent = "Not saved: " + reason;
      status.className = "save-refused";
    }
  }

  function reasonOf(xhr) {
    var type = xhr.getResponseHeader("Content-Type") || "";
    if (type.indexOf("text/plain") === 0 && xhr.responseText) {
      return xhr.responseText;
    }
    return "the server answered " + xhr.status + "; your text is still in the field, try Save again";
  }

  function reportRefusedSaves() {
    document.body.addEventListener("htmx:responseError", function (event) {
      var form = event.detail.elt.closest("form[data-autosave]");
      if (form) {
        refusedSave(form, reasonOf(event.detail.xhr));
      }
    });
    document.body.addEventListener("htmx:sendError", function (event) {
      var form = event.detail.elt.closest("form[data-autosave]");
      if (form) {
        refusedSave(form, "the server could not be reached; your text is still in the field, try Save again");
      }
    });
  }

  document.addEventListener("DOMContentLoaded", function () {
    reportRefusedSaves();
    document.querySelectorAll("[data-dropzone]").forEach(enhanceDropzone);
    var presentation = document.querySelector("[data-present]");
    if (presentation) {
      stepWithKeys(presentation);
    }
  });
})();

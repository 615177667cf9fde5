/* Progressive enhancement only: every page works with scripts off.
   The upload drop zone accepts a file dropped anywhere inside it (the file
   input alone already accepts drops) and names the chosen file. */
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

  document.addEventListener("DOMContentLoaded", function () {
    document.querySelectorAll("[data-dropzone]").forEach(enhanceDropzone);
  });
})();

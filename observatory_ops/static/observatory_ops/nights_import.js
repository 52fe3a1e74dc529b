// The nightly log's import page (logbook/nights_import.html): says the file is being read.
document.getElementById("import-form").addEventListener("submit", function () {
  document.getElementById("import-progress").hidden = false; document.getElementById("import-button").disabled = true; });

// A file dropped on a drop area goes into its file input, and "Go back" goes back; nothing
// else needs script.  (No inline script anywhere: the Content-Security-Policy forbids it.)
document.querySelectorAll("a[data-back]").forEach(function (link) {
  link.addEventListener("click", function (event) {
    if (window.history.length > 1) {
      event.preventDefault();
      window.history.back();
    }
  });
});

document.querySelectorAll("[data-drop]").forEach(function (zone) {
  var input = zone.querySelector("input[type=file]");
  if (!input) { return; }
  zone.addEventListener("dragover", function (event) {
    event.preventDefault();
    zone.classList.add("over");
  });
  zone.addEventListener("dragleave", function () { zone.classList.remove("over"); });
  zone.addEventListener("drop", function (event) {
    event.preventDefault();
    zone.classList.remove("over");
    if (event.dataTransfer && event.dataTransfer.files.length) {
      input.files = event.dataTransfer.files;
    }
  });
});

// After excluding or putting back a point the page returns to the same table row
// (#std-CURVE-ROW): keyboard focus goes back to that row's reason box, or the row.
(function () {
  var id = window.location.hash.slice(1);
  if (!/^std-\d+-\d+$/.test(id)) { return; }
  var row = document.getElementById(id);
  if (!row) { return; }
  var box = row.querySelector("input[name=reason]");
  (box || row).focus();
  row.scrollIntoView({block: "center"});
}());

// A box whose pattern says "words, not only spaces" explains itself in the page's own
// sentence (its title) instead of the browser's "match the requested format".
document.querySelectorAll("input[pattern][title]").forEach(function (box) {
  box.addEventListener("invalid", function () {
    box.setCustomValidity(box.validity.patternMismatch ? box.title : "");
  });
  box.addEventListener("input", function () { box.setCustomValidity(""); });
});

// The finish form of a work order (workorders/finish.html).
// The count of another part used follows the part chosen in its row: the keyboard of digits alone for a part counted
// in whole units (the form's data-whole-parts), digits and a point for one kept by measure. Finishing refuses a
// fraction of the first.
document.querySelectorAll("select[data-whole-parts]").forEach(function (select) {
  var whole = select.dataset.wholeParts.split(" ");
  var count = document.getElementById(select.id.replace("other_part_", "other_quantity_"));
  if (!count) { return; }
  select.addEventListener("change", function () {
    count.inputMode = whole.indexOf(select.value) >= 0 ? "numeric" : "decimal";
  });
});

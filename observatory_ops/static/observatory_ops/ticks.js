// A work order's page (workorders/detail.html): its step and isolation ticks.
// Progressive enhancement: a changed box is recorded at once and the page stays where it is. Without a
// script, or when the answer is not the expected one, each line's own form (Record) does the same. With no
// connection the box goes back as it was and says so: a plain post would lose the page to the browser's error page.
// A line takes no tap while its tick is being sent, nor for SETTLE_MS after it is recorded: on a tablet the second
// tap of a double tap on a line's words took back the tick the first had just recorded (a tablet review).
var SETTLE_MS = 1000;
var said = document.getElementById("tick-said");
function sayRefused(text) {  // emptied first, so the same refusal twice is announced twice
  said.textContent = "";
  window.setTimeout(function () { said.textContent = text; }, 50);
}
document.querySelectorAll("form.tick").forEach(function (form) {
  var box = form.querySelector("input[type=checkbox]"), note = form.querySelector(".tick-note");
  var busy = false, result = form.querySelector(".tick-result input"), why = form.querySelector(".tick-in-place input");
  form.querySelector("button").hidden = true;
  // Enter in a result box (the tablet keyboard's Go) asks for the tick it is typed for; a plain post of the box as it
  // stands, unticked, would take nothing back and lose what was typed (a diff review).
  form.addEventListener("submit", function (event) {
    event.preventDefault();
    if (!busy && result && !box.checked && result.value.trim()) {
      box.checked = true;
      box.dispatchEvent(new Event("change"));
    } else if (!busy && why && document.activeElement === why && why.value.trim()) {
      // Enter in the engineer's why, in a lock holder's place: the line's change it was typed for (a diff review's
      // Enter there did nothing and said nothing).
      box.checked = !box.checked;
      box.dispatchEvent(new Event("change"));
    } else if (!busy && ((result && !box.checked && document.activeElement === result) ||
                         (why && document.activeElement === why))) {
      // Enter in an empty box: what it waits for is said, not nothing (a review's left-alone list).
      note.classList.add("refused");
      note.textContent = document.activeElement === why
        ? "Write why you change this line in the lock holder's place first, then press Enter."
        : "Type the result first, then press Enter or tick the line.";
      sayRefused(note.textContent);
    }
  });
  // A tap on the box or on its words reaches the label; cancelled, the box stays as it is and sends nothing.
  form.querySelector("label").addEventListener("click", function (event) {
    if (busy) { event.preventDefault(); }
  });
  box.addEventListener("change", function () {
    // The lockout and the lock removal ask first (data-confirm): a tap on their words ticks them, and their ticks
    // let other steps go on. The lockout is refused while an isolation point is not ticked, and the refusal names
    // the points: asked first, the technician would affirm a lockout that is then refused.
    var refusedAnyway = form.closest(".lockout-line") !== null
      && document.querySelector("#isolation input[type=checkbox]:not(:checked)") !== null;
    if (box.checked && form.dataset.confirm && !refusedAnyway && !window.confirm(form.dataset.confirm)) {
      box.checked = false;
      return;
    }
    var data = new FormData(form);
    if (!box.checked) { data.delete("result"); }  // a tick taken back carries no result
    // A refusal answers one request: once anything is changed again, the lines it was shown on read as recorded
    // (what it asked for may have been done meanwhile).
    document.querySelectorAll("form.tick .tick-note.refused").forEach(function (shown) {
      shown.classList.remove("refused");
      shown.textContent = shown.dataset.recorded;
    });
    busy = true;
    fetch(form.action, {method: "POST", body: data, headers: {"Accept": "application/json"}, credentials: "same-origin"})
      .catch(function () {
        box.checked = !box.checked;
        busy = false;
        note.classList.add("refused");
        note.textContent = "No connection to the server: this tick was not kept. Tap again when it is back.";
        sayRefused(note.textContent);
        return null;
      })
      .then(function (response) {
        if (response === null) { return; }
        return response.json().then(function (answer) {
          // A refusal carries the line's state as recorded (someone else may have ticked it meanwhile).
          var ticked = typeof answer.ticked === "boolean" ? answer.ticked : (response.ok ? box.checked : !box.checked);
          box.checked = ticked;
          form.parentNode.classList.toggle("ticked", ticked);
          var result = form.querySelector(".tick-result");  // a step that asks for its result: its box, until ticked
          if (result) { result.hidden = ticked; }
          // Recorded in the lock holder's place: the line is now the engineer's own, and asks no why again.
          var inPlace = form.querySelector(".tick-in-place");
          if (inPlace && response.ok) { inPlace.remove(); }
          note.dataset.recorded = answer.note || "";
          note.classList.toggle("refused", !response.ok);
          note.textContent = response.ok ? answer.note : answer.error + (answer.note ? " (" + answer.note + ")" : "");
          if (!response.ok) { sayRefused(answer.error); }
          if (response.ok) {
            window.setTimeout(function () { busy = false; }, SETTLE_MS);
          } else {
            busy = false;
          }
        }, function () { busy = false; form.submit(); });  // not the expected answer: the plain post
      });
  });
});

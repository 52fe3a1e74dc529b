/* observatory_ops: forms that keep what was typed when the network drops (base.html loads this, deferred).
   Progressive enhancement: without it every form is sent as the browser sends it.

   1. Before a POST form is sent, the server is asked whether it answers: a HEAD request for its small "alive"
      address (body data-alive: no database, no page built again; the page's own address may take POST only, or
      run a long search), never from a cache, given at most CHECK_MS. If it does not answer, nothing is sent: the page stays as it is,
      with a note beside the button pressed. If it answers, the form is sent as pressed (requestSubmit with the
      same button, so the button's name and value go with it); the page's own submit handlers see only that
      send, once (nights_import.html shows its progress then). The sign-out form (data-drafts-forget) has nothing
      typed to keep: it goes at once, and takes the browser's drafts with it.
   2. What is typed in a POST form is kept in the browser's localStorage, for the signed-in user only (body
      data-drafts), for a shift (KEEP_MS), and brought back when the form's page is opened again: after a send that
      never reached the server (the browser's error page takes the form page's place, so the way back is a link to
      it), a reload, a tab the tablet closed to save memory, or one closed by hand (a tablet review lost a finish
      form's findings so; sessionStorage ends with its tab). Never after a send the server answered (see SENT),
      and signing out forgets every draft the browser keeps.
   3. A page whose form came back with problems puts the focus on their list (base.html, _error_summary.html), and
      one that says a refusal as a message (".messages .msg-error") on that message. */
(function () {
  "use strict";

  var summary = document.getElementById("error-summary") || document.querySelector(".messages .msg-error");
  if (summary) {
    summary.focus();
  }

  var owner = document.body.dataset.drafts, storage = null, tab = null;
  try {
    storage = owner ? window.localStorage : null;  // the drafts: they outlive a closed tab
    tab = owner ? window.sessionStorage : null;  // SENT: this tab's own send
  } catch (refused) {  // storage turned off in the browser: no drafts, the rest works
    storage = tab = null;
  }
  var PREFIX = "draft:" + owner + ":";
  // The page a form was sent from, until the next page of ours loads. If that page is the server's answer to the
  // send, the drafts of every form of that page go (another form's half-typed words are stale once the page's
  // record has changed): every form of ours answers a send it took with a redirect (to the record saved, or back to
  // its page), and one it refused with the form again, its problems listed (error-summary) and what was typed in
  // it. Any other page (after the browser's error page) keeps the draft.
  var SENT = "draft-sent";

  /* --- 1. Check before sending ------------------------------------------------------------------------------ */

  var CHECK_MS = 5000;
  var SLOW_MS = 1000;
  var NOT_SENT = "Not sent: no connection to the server. What you typed is still here; press again when the " +
    "connection is back.";
  var CHECKING = "Checking the connection to the server…";
  var resending = new WeakSet();  // forms inside their requestSubmit after a passed check
  var checking = new WeakSet();

  function posts(form, submitter) {
    var method = submitter && submitter.hasAttribute("formmethod") ? submitter.getAttribute("formmethod")
      : form.getAttribute("method");
    return (method || "get").toLowerCase() === "post";
  }

  // The server answers if any reply comes back, a refusal or a redirect included (to the sign-in page, say), except
  // a gateway's word that the application behind it is not there (502, 504).
  function serverAnswers() {
    var stop = new AbortController();
    var timer = setTimeout(function () { stop.abort(); }, CHECK_MS);
    return fetch(document.body.dataset.alive || location.href, {method: "HEAD", cache: "no-store", credentials: "same-origin", redirect: "manual",
                           signal: stop.signal})
      .then(function (reply) { return reply.status !== 502 && reply.status !== 504; },
            function () { return false; })
      .finally(function () { clearTimeout(timer); });
  }

  // The note beside the button pressed (or the form's first submit button): a live region, re-announced each
  // time it is set, so a second failed press is heard too.
  function say(form, submitter, words) {
    var note = form.querySelector(".send-note");
    if (!note) {
      note = document.createElement("span");
      note.className = "send-note";
      note.setAttribute("role", "alert");
    }
    var button = submitter || form.querySelector("button:not([type=button]):not([type=reset]), input[type=submit]");
    if (button) {
      button.after(note);
    } else {
      form.append(note);
    }
    note.textContent = "";
    if (words) {
      setTimeout(function () { note.textContent = words; }, 50);
    }
  }

  function guard(event) {
    var form = event.target, submitter = event.submitter || null;
    if (form.hasAttribute("data-drafts-forget")) {
      forgetDrafts();  // signing out: nothing typed to keep, so no check; nothing typed stays behind in this tab
      return;
    }
    if (!posts(form, submitter) || resending.has(form)) {
      return;  // a GET form (a filter), or the send after a passed check
    }
    event.preventDefault();
    event.stopImmediatePropagation();
    if (checking.has(form)) {
      return;  // pressed again while the check runs
    }
    checking.add(form);
    var slow = setTimeout(function () { say(form, submitter, CHECKING); }, SLOW_MS);
    serverAnswers().then(function (answers) {
      clearTimeout(slow);
      checking.delete(form);
      say(form, submitter, answers ? "" : NOT_SENT);
      if (answers) {
        draftSent(form);
        resending.add(form);
        try {
          form.requestSubmit(submitter);  // fires the submit event again, at once
        } finally {
          resending.delete(form);
        }
      }
    });
  }

  if (HTMLFormElement.prototype.requestSubmit) {  // without it (an old browser) forms are sent as they always were
    window.addEventListener("submit", guard, true);  // capture: before any handler of the page's own
  }

  /* --- 2. Drafts ------------------------------------------------------------------------------------------ */

  var KEEP_MS = 12 * 3600 * 1000;  // a shift: an older draft is dropped rather than brought back

  // Typed fields only: never a hidden field (the CSRF token), a password, a file, or a tick box (a confirmation
  // is ticked again, on purpose, for what is on the page now).
  var UNTYPED = ["hidden", "password", "file", "checkbox", "radio", "submit", "button", "reset", "image"];

  function drafted(form) {
    return form instanceof HTMLFormElement && posts(form, null) && !form.hasAttribute("data-drafts-forget");
  }

  function fields(form) {
    return Array.prototype.filter.call(form.elements, function (field) {
      return field.name && (field.tagName === "TEXTAREA" || field.tagName === "SELECT" ||
                            (field.tagName === "INPUT" && UNTYPED.indexOf(field.type) < 0));
    });
  }

  // A page's drafts share its prefix; each form is named by where it sends and, among forms sending to the same
  // address, its place (which forms a page shows changes with the record's state: a position alone would move).
  function pageKey() {
    return PREFIX + location.pathname + location.search + "|";
  }

  function keyOf(form) {
    var action = form.getAttribute("action") || "";
    var alike = Array.prototype.filter.call(document.forms, function (other) {
      return (other.getAttribute("action") || "") === action;
    });
    return pageKey() + action + "#" + alike.indexOf(form);
  }

  function selected(field) {
    return Array.prototype.filter.call(field.options, function (o) { return o.selected; })
      .map(function (o) { return o.value; });
  }

  // Only what differs from what the server wrote: a field left alone (the reading's time, "now" when the page
  // was made) takes the server's value again when the page is made again.
  function changed(field) {
    if (field.tagName === "SELECT") {
      return Array.prototype.some.call(field.options, function (o) { return o.selected !== o.defaultSelected; });
    }
    return field.value !== field.defaultValue;
  }

  function save(event) {
    var form = event.target.form;
    if (!drafted(form)) {
      return;
    }
    var values = [];
    fields(form).forEach(function (field, index) {
      if (changed(field)) {
        values.push([index, field.name, field.tagName === "SELECT" ? selected(field) : field.value]);
      }
    });
    var key = keyOf(form);
    if (values.length) {
      storage.setItem(key, JSON.stringify({at: Date.now(), values: values}));
    } else {
      storage.removeItem(key);
    }
  }

  function draftSent(form) {
    if (storage && drafted(form)) {
      tab.setItem(SENT, pageKey());
    }
  }

  function forgetDrafts() {
    if (storage) {
      Object.keys(storage).forEach(function (key) {
        if (key.indexOf("draft:") === 0) {
          storage.removeItem(key);
        }
      });
      tab.removeItem(SENT);
    }
  }

  function restore(form) {
    var key = keyOf(form), draft = JSON.parse(storage.getItem(key) || "null");
    if (!draft) {
      return;
    }
    if (Date.now() - draft.at > KEEP_MS) {
      storage.removeItem(key);
      return;
    }
    var all = fields(form), back = 0;
    draft.values.forEach(function (entry) {
      var field = all[entry[0]];
      if (!field || field.name !== entry[1]) {
        return;  // the form has changed since
      }
      if (field.tagName === "SELECT") {
        if (selected(field).join("\n") !== entry[2].join("\n")) {
          Array.prototype.forEach.call(field.options, function (o) { o.selected = entry[2].indexOf(o.value) >= 0; });
          back += 1;
        }
      } else if (field.value !== entry[2]) {
        field.value = entry[2];
        back += 1;
      }
    });
    if (!back) {  // the page already holds what was typed
      storage.removeItem(key);
      return;
    }
    var note = document.createElement("p");
    note.className = "draft-note";
    note.setAttribute("role", "status");
    note.textContent = "What you typed here before is back; it may not have reached the server. Check it and " +
      "send it again.";
    var clear = document.createElement("button");
    clear.type = "button";
    clear.textContent = "Clear what was brought back";
    clear.addEventListener("click", function () {
      form.reset();  // back to what the server wrote
      storage.removeItem(key);
      note.remove();
    });
    note.append(clear);
    form.prepend(note);
  }

  if (storage) {
    var sent = tab.getItem(SENT);
    if (sent) {
      tab.removeItem(SENT);
      var arrival = performance.getEntriesByType("navigation")[0];
      if (summary || !arrival || arrival.redirectCount > 0) {
        Object.keys(storage).forEach(function (key) {
          if (key.indexOf(sent) === 0) {
            storage.removeItem(key);
          }
        });
      }
    }
    // A form that came back with problems holds what was sent, as the server read it: no draft over it.
    if (!summary) {
      Array.prototype.filter.call(document.forms, drafted).forEach(restore);
    }
    document.addEventListener("input", save);
    document.addEventListener("change", save);
  }
}());

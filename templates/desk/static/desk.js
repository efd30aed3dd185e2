// The review desk's one script (served from the desk itself; no inline script is allowed).
// On a message page: an edited text is sent to /try and its ledger replaces the one shown.
"use strict";

(function () {
  const area = document.getElementById("try-text");
  if (!area) return;
  const holder = document.getElementById("ledger");
  const status = document.getElementById("try-status");
  const reset = document.getElementById("try-reset");
  const csrf = document.querySelector('meta[name="csrf-token"]').content;
  const original = area.dataset.original;
  const queuedClosing = Number(holder.dataset.queuedClosing);
  let timer = null;
  let asked = 0;

  function say(text) { status.textContent = text; }

  function signed(x) { return (x >= 0 ? "+" : "") + x.toFixed(2); }

  async function explain() {
    const mine = ++asked;
    say("Explaining the edited text…");
    let response;
    try {
      response = await fetch("/try", {
        method: "POST",
        credentials: "same-origin",
        headers: { "Content-Type": "application/json", "X-CSRF-Token": csrf },
        // An edited text is not the queued message: its ledger carries no message id.
        body: JSON.stringify(area.value === original ? { text: area.value, message_id: area.dataset.messageId }
                                                     : { text: area.value }),
      });
    } catch (err) {
      say("The desk did not answer; the ledger below is the last one explained.");
      return;
    }
    if (mine !== asked) return;  // a newer edit has been sent meanwhile
    if (!response.ok) {
      say("The desk refused the text (" + response.status + "); the ledger below is the last one explained.");
      return;
    }
    holder.innerHTML = await response.text();
    const now = Number(holder.querySelector(".desk-ledger").dataset.closing);
    const edited = area.value !== original;
    reset.hidden = !edited;
    holder.classList.toggle("desk-edited", edited);
    if (edited) {
      const change = now - queuedClosing;
      say("Edited text: closing balance " + signed(now) + " (queued text " + signed(queuedClosing) +
          ", change " + signed(change) + "). Not saved.");
    } else {
      say("Queued text: closing balance " + signed(now) + ".");
    }
  }

  area.addEventListener("input", function () {
    clearTimeout(timer);
    timer = setTimeout(explain, 250);
  });
  reset.addEventListener("click", function () {
    area.value = original;
    explain();
  });
})();

// The review page (see pages/review.rs): keys and buttons send Junk / Fine
// as POST /v1/feedback with the page's token; a marked message leaves the
// queue and the focus moves to the next one.
(function () {
  "use strict";
  var cg = window.chaffgate;
  var MODERATOR_KEY = "chaffgate.moderator";
  var content = document.getElementById("cg-content");

  function items() {
    return Array.prototype.slice.call(content.querySelectorAll(".cg-item"));
  }

  function itemOf(node) {
    return node && node.closest ? node.closest(".cg-item") : null;
  }

  function focusItem(item) {
    if (item) {
      item.focus();
      item.scrollIntoView({ block: "nearest" });
    }
  }

  // Moves the focus `step` items from `from` (or to the first item).
  function move(from, step) {
    var list = items();
    if (list.length === 0) {
      return false;
    }
    var at = list.indexOf(from);
    var to = at < 0 ? 0 : Math.min(list.length - 1, Math.max(0, at + step));
    focusItem(list[to]);
    return true;
  }

  function focusTop() {
    var list = items();
    if (list.length > 0) {
      focusItem(list[0]);
    } else {
      var title = document.getElementById("cg-queue-title");
      if (title) {
        title.focus();
      }
    }
  }

  function setBusy(item, isBusy) {
    item.setAttribute("aria-busy", isBusy ? "true" : "false");
    Array.prototype.forEach.call(item.querySelectorAll("button"), function (button) {
      button.disabled = isBusy;
    });
  }

  function waitingLeft() {
    var count = document.getElementById("cg-count");
    if (!count) {
      return 0;
    }
    var left = Math.max(0, Number(count.dataset.count) - 1);
    count.dataset.count = String(left);
    count.textContent = String(left);
    return left;
  }

  // Takes `item` out of the queue, says `said`, and focuses the next one.
  function remove(item, said) {
    var list = items();
    var at = list.indexOf(item);
    var next = list[at + 1] || list[at - 1] || null;
    var entry = item.parentElement;
    entry.parentElement.removeChild(entry);
    var left = waitingLeft();
    cg.announce(said + " " + left + (left === 1 ? " message waits." : " messages wait."));
    if (next) {
      focusItem(next);
    } else {
      // This page is done: fetch what else waits (or the empty queue).
      cg.load();
    }
  }

  function moderatorName() {
    var field = document.getElementById("cg-moderator");
    if (!field) {
      return { ok: true, name: null };
    }
    var name = field.value.trim();
    if (name === "") {
      cg.announce("Enter your name first: it is recorded with each verdict.");
      field.focus();
      return { ok: false, name: null };
    }
    try {
      window.sessionStorage.setItem(MODERATOR_KEY, name);
    } catch (e) {
      // Not kept; the field still holds it.
    }
    return { ok: true, name: name };
  }

  function mark(item, label) {
    if (item.getAttribute("aria-busy") === "true") {
      return;
    }
    var who = moderatorName();
    if (!who.ok) {
      return;
    }
    var body = { decision_id: item.dataset.decision, label: label };
    if (who.name !== null) {
      body.moderator = who.name;
    }
    var summary = item.dataset.summary;
    setBusy(item, true);
    cg.request("/v1/feedback", {
      method: "POST",
      headers: { "Content-Type": "application/json" },
      body: JSON.stringify(body)
    }).then(function (response) {
      if (response.ok) {
        cg.alert("");
        remove(item, "Marked " + label + ": " + summary + ".");
        return null;
      }
      return cg.errorMessage(response).then(function (message) {
        if (response.status === 401) {
          cg.signIn("Sign in again: " + message + ". Nothing was recorded.");
        } else if (response.status === 403) {
          cg.signIn("This token may not give verdicts: " + message + ".");
        } else if (response.status === 410) {
          remove(item, "Not recorded, " + summary + " is past the feedback window.");
        } else {
          setBusy(item, false);
          cg.alert("Not recorded: " + message + ".");
          focusItem(item);
        }
      });
    }, function () {
      setBusy(item, false);
      cg.alert("The server could not be reached; nothing was recorded.");
      focusItem(item);
    });
  }

  content.addEventListener("click", function (event) {
    var button = event.target.closest ? event.target.closest("button[data-label]") : null;
    var item = itemOf(button);
    if (button && item) {
      mark(item, button.dataset.label);
    }
  });

  document.addEventListener("keydown", function (event) {
    if (event.defaultPrevented || event.ctrlKey || event.metaKey || event.altKey) {
      return;
    }
    var target = event.target;
    if (target.closest && target.closest("input, select, textarea, [contenteditable]")) {
      return;
    }
    var item = itemOf(target);
    var isHandled;
    switch (event.key) {
      case "j":
        isHandled = move(item, 1);
        break;
      case "k":
        isHandled = move(item, -1);
        break;
      // Arrows only inside the queue, so they still scroll elsewhere.
      case "ArrowDown":
        isHandled = item !== null && move(item, 1);
        break;
      case "ArrowUp":
        isHandled = item !== null && move(item, -1);
        break;
      case "x":
      case "f":
        isHandled = item !== null;
        if (isHandled) {
          mark(item, event.key === "x" ? "junk" : "fine");
        }
        break;
      default:
        isHandled = false;
    }
    if (isHandled) {
      event.preventDefault();
    }
  });

  document.addEventListener("chaffgate:fragment", function () {
    var field = document.getElementById("cg-moderator");
    if (field) {
      try {
        field.value = window.sessionStorage.getItem(MODERATOR_KEY) || "";
      } catch (e) {
        // Storage is off: the field starts empty.
      }
    }
    focusTop();
  });
})();

// Shared script of chaffgate's pages (see pages/mod.rs). It keeps the
// access token in this tab's session storage only (never local storage,
// never a cookie), fetches the page's server-rendered fragment with it,
// inserts the fragment, and speaks through a status and an alert region.
(function () {
  "use strict";
  var TOKEN_KEY = "chaffgate.token";
  var page = document.getElementById("cg-page");
  var content = document.getElementById("cg-content");
  var login = document.getElementById("cg-login");
  var loginWhy = document.getElementById("cg-login-why");
  var tokenInput = document.getElementById("cg-token");
  var signOut = document.getElementById("cg-signout");
  var statusRegion = document.getElementById("cg-status");
  var alertRegion = document.getElementById("cg-alert");
  var isOpen = page.dataset.open === "true";

  function storedToken() {
    try {
      return window.sessionStorage.getItem(TOKEN_KEY);
    } catch (e) {
      return null;
    }
  }

  function keepToken(token) {
    try {
      window.sessionStorage.setItem(TOKEN_KEY, token);
      return true;
    } catch (e) {
      return false;
    }
  }

  function forgetToken() {
    try {
      window.sessionStorage.removeItem(TOKEN_KEY);
    } catch (e) {
      // Storage is off, so nothing was kept.
    }
  }

  // fetch, with the token (if any) as a bearer header and no cookies.
  function request(url, init) {
    init = init || {};
    var headers = new Headers(init.headers || {});
    var token = storedToken();
    if (token !== null) {
      headers.set("Authorization", "Bearer " + token);
    }
    init.headers = headers;
    init.credentials = "omit";
    init.cache = "no-store";
    return fetch(url, init);
  }

  // The message of an error answer ({"error": {"message": ...}}).
  function errorMessage(response) {
    var fallback = "the server answered " + response.status;
    return response.text().then(function (text) {
      try {
        var body = JSON.parse(text);
        if (body && body.error && body.error.message) {
          return body.error.message;
        }
      } catch (e) {
        // Not JSON: use the fallback.
      }
      return fallback;
    }, function () {
      return fallback;
    });
  }

  var announceTimer = null;
  function announce(text) {
    // Emptied first so that the same words twice are spoken twice.
    statusRegion.textContent = "";
    window.clearTimeout(announceTimer);
    announceTimer = window.setTimeout(function () {
      statusRegion.textContent = text;
    }, 50);
  }

  function showAlert(text) {
    alertRegion.textContent = text;
  }

  function signIn(why) {
    forgetToken();
    content.innerHTML = "";
    signOut.hidden = true;
    loginWhy.textContent = why || "";
    login.hidden = false;
    tokenInput.value = "";
    tokenInput.focus();
  }

  function load(url) {
    url = url || page.dataset.fragment + window.location.search;
    content.setAttribute("aria-busy", "true");
    return request(url).then(function (response) {
      if (response.status === 401) {
        return errorMessage(response).then(function (message) {
          signIn("Sign in again: " + message + ".");
        });
      }
      if (response.status === 403) {
        return errorMessage(response).then(function (message) {
          signIn("This token may not open this page: " + message + ".");
        });
      }
      if (!response.ok) {
        return errorMessage(response).then(function (message) {
          showAlert("The page could not be loaded: " + message + ".");
        });
      }
      return response.text().then(function (html) {
        showAlert("");
        login.hidden = true;
        signOut.hidden = storedToken() === null;
        // Server-rendered and escaped there; inserted scripts never run,
        // and the page's CSP allows no other script.
        content.innerHTML = html;
        document.dispatchEvent(new CustomEvent("chaffgate:fragment"));
      });
    }, function () {
      showAlert("The server could not be reached. Check that chaffgate is running, then reload the page.");
    }).then(function () {
      content.removeAttribute("aria-busy");
    });
  }

  login.addEventListener("submit", function (event) {
    event.preventDefault();
    var token = tokenInput.value.trim();
    tokenInput.value = "";
    if (token === "") {
      loginWhy.textContent = "Enter a token first.";
      tokenInput.focus();
      return;
    }
    if (!keepToken(token)) {
      loginWhy.textContent = "This browser does not allow session storage, so the token cannot be kept for this tab.";
      return;
    }
    login.hidden = true;
    announce("Signing in.");
    load();
  });

  signOut.addEventListener("click", function () {
    signIn("Signed out: the token was removed from this tab.");
    announce("Signed out.");
  });

  window.chaffgate = {
    request: request,
    load: load,
    announce: announce,
    alert: showAlert,
    errorMessage: errorMessage,
    signIn: signIn,
    isOpen: isOpen
  };

  if (isOpen || storedToken() !== null) {
    load();
  } else {
    signIn("");
  }
})();

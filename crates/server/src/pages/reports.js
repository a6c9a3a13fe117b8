// The drift report page (see pages/reports.rs): the window form puts its
// non-empty fields into the page's address and reloads the fragment, so
// that the address can be kept or shared and reload shows the same report.
(function () {
  "use strict";
  var cg = window.chaffgate;
  var content = document.getElementById("cg-content");

  content.addEventListener("submit", function (event) {
    var form = event.target;
    if (!form.classList || !form.classList.contains("rp-filters")) {
      return;
    }
    event.preventDefault();
    var query = new URLSearchParams();
    Array.prototype.forEach.call(form.elements, function (field) {
      if (field.name && field.value.trim() !== "") {
        query.set(field.name, field.value.trim());
      }
    });
    var search = query.toString();
    window.history.pushState(null, "", window.location.pathname + (search ? "?" + search : ""));
    cg.announce("Loading the report.");
    cg.load();
  });

  window.addEventListener("popstate", function () {
    cg.load();
  });

  document.addEventListener("chaffgate:fragment", function () {
    var title = document.getElementById("rp-title");
    if (title) {
      cg.announce("Report loaded: " + title.textContent + ".");
    }
  });
})();

// The line overview refreshes its main part every few seconds (the page's data-refresh).
// The server sends the part as HTML with every name already escaped.
(function () {
  "use strict";
  var seconds = parseFloat(document.body.getAttribute("data-refresh")) || 2;
  var main = document.getElementById("main");
  function refresh() {
    fetch("/part", { cache: "no-store" })
      .then(function (reply) { return reply.text(); })
      .then(function (html) {
        main.innerHTML = html;
        document.body.classList.remove("stale");
      })
      .catch(function () { document.body.classList.add("stale"); })
      .finally(function () { window.setTimeout(refresh, seconds * 1000); });
  }
  window.setTimeout(refresh, seconds * 1000);
})();

// Checked-plan enhancements: a print button, select-on-focus for the share link. The page works without this file.
(function () {
  "use strict";
  document.documentElement.classList.add("has-js");
  document.querySelectorAll("[data-print]").forEach(function (b) {
    b.addEventListener("click", function () { window.print(); });
  });
  const share = document.getElementById("share-url");
  if (share) {
    // The server writes the link relative to the site unless a public address is configured; show it whole.
    share.value = new URL(share.value, window.location.href).href;
    share.closest("[data-share]").setAttribute("data-share", share.value);
    share.addEventListener("focus", function () { share.select(); });
  }
})();

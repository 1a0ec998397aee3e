// Checked-plan enhancements: a print button, select-on-focus for the share link. The page works without this file.
(function () {
  "use strict";
  document.documentElement.classList.add("has-js");
  document.querySelectorAll("[data-print]").forEach(function (b) {
    b.addEventListener("click", function () { window.print(); });
  });
  const share = document.getElementById("share-url");
  if (share) {
    share.addEventListener("focus", function () { share.select(); });
  }
})();

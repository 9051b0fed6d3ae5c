/*
 * Type to search in an open dropdown.
 *
 * A dropdown opened with the mouse puts the keyboard on its highlighted option, so letters typed next went
 * nowhere: a user clicking the asset picker and typing a name saw nothing happen. A printable key pressed
 * while the keyboard is inside an open dropdown's list, but not in its search box, moves the keyboard to
 * that search box first; the browser then types the letter there, which filters the list, and Enter
 * picks the first match (the dropdown's own rule).
 */
(function () {
  "use strict";
  document.addEventListener("keydown", function (event) {
    if (event.key.length !== 1 || event.ctrlKey || event.metaKey || event.altKey) {
      return;
    }
    var active = document.activeElement;
    if (!active || !active.closest) {
      return;
    }
    var content = active.closest(".dash-dropdown-content");
    if (!content || active.classList.contains("dash-dropdown-search")) {
      return;
    }
    var search = content.querySelector("input.dash-dropdown-search");
    if (search) {
      search.focus();  // before the key's default action: the letter lands in the search box
    }
  }, true);
})();

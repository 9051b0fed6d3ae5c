/*
 * Type to search in an open dropdown.
 *
 * A dropdown opened with the mouse puts the keyboard on its highlighted option, so letters typed next went
 * nowhere: a user clicking the asset picker and typing a name saw nothing happen. A printable key pressed
 * while the keyboard is inside an open dropdown's list, but not in its search box, moves the keyboard to
 * that search box first; the browser then types the letter there, which filters the list, and Enter
 * picks the first match (the dropdown's own rule).
 *
 * The keyboard reaches the highlighted option a frame after the list opens. A letter typed in that frame
 * was pressed on the dropdown's button and released on the option, and neither took it: the first letter
 * of a name typed at once after the click was lost. A key pressed on the button of an open dropdown
 * therefore also moves the keyboard to the search box of the list the button controls.
 */
(function () {
  "use strict";

  function openList(active) {
    var content = active.closest(".dash-dropdown-content");
    if (content) {
      return content;
    }
    var button = active.closest("button.dash-dropdown");
    if (!button || button.getAttribute("aria-expanded") !== "true") {
      return null;
    }
    var id = button.getAttribute("aria-controls");
    var list = id ? document.getElementById(id) : null;
    return list && list.classList.contains("dash-dropdown-content") ? list : null;
  }

  document.addEventListener("keydown", function (event) {
    if (event.key.length !== 1 || event.ctrlKey || event.metaKey || event.altKey) {
      return;
    }
    var active = document.activeElement;
    if (!active || !active.closest || active.classList.contains("dash-dropdown-search")) {
      return;
    }
    var content = openList(active);
    if (!content) {
      return;
    }
    var search = content.querySelector("input.dash-dropdown-search");
    if (search) {
      search.focus();  // before the key's default action: the letter lands in the search box
    }
  }, true);
})();

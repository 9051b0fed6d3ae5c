/*
 * Keyboard paths for what the mouse does.
 *
 * 1. Grids whose rows open a page (a cell marked "link-cell", e.g. the Fleet page's asset ids): Enter on
 *    any focused cell of such a row clicks its link cell, as a mouse click on it would. (Tab and Shift+Tab
 *    leave a grid: components.data_grid tells the grid not to move between cells on Tab.)
 * 2. Upload areas: the chosen file is let go once the upload has been read, so choosing the same file
 *    again (corrected, under the same name) is read again; browsers report no change otherwise.
 * 3. Upload areas' file inputs are hidden and unnamed: each is given the name its area states in its
 *    data-label attribute (or "Files to upload"), so a screen reader says what the button chooses.
 */
(function () {
  "use strict";
  document.addEventListener("keydown", function (event) {
    if (event.key !== "Enter" || event.ctrlKey || event.metaKey || event.altKey || event.shiftKey) {
      return;
    }
    var active = document.activeElement;
    // the focused cell itself, or an element inside it
    var cell = active && active.closest ? active.closest(".ag-cell") : null;
    var row = cell && cell.closest(".ag-row");
    if (!row) {
      return;
    }
    // a pinned column lives in its own container: find the row across the grid, by its id where the grid
    // gives rows one (it stays the same while rows are re-sorted or redrawn), else by its index
    var grid = cell.closest(".ag-root-wrapper");
    var id = row.getAttribute("row-id");
    var key = id !== null ? '[row-id="' + (window.CSS && CSS.escape ? CSS.escape(id) : id) + '"]'
                          : '[row-index="' + row.getAttribute("row-index") + '"]';
    var link = grid && grid.querySelector(".ag-row" + key + " .link-cell");
    if (link) {
      event.preventDefault();
      event.stopPropagation();
      link.click();
    }
  }, true);

  document.addEventListener("change", function (event) {
    var input = event.target;
    if (!input || input.type !== "file" || !input.closest) {
      return;
    }
    // after the upload area has taken the files (its own change handler runs first), let them go
    window.setTimeout(function () { input.value = ""; }, 0);
  }, false);

  function nameUploads() {
    var inputs = document.querySelectorAll(".upload input[type=file]:not([aria-label])");
    for (var i = 0; i < inputs.length; i++) {
      var area = inputs[i].closest("[data-label]");
      inputs[i].setAttribute("aria-label", area ? area.getAttribute("data-label") : "Files to upload");
    }
  }
  // pages are drawn after this script runs, and again on each visit: name the inputs as they appear
  new MutationObserver(nameUploads).observe(document.documentElement, {childList: true, subtree: true});
  nameUploads();
})();

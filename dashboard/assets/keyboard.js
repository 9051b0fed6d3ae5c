/*
 * Keyboard paths for what the mouse does.
 *
 * 1. Grids whose rows open a page (a cell marked "link-cell", e.g. the Fleet page's asset ids): Enter on
 *    any focused cell of such a row clicks its link cell, as a mouse click on it would.
 * 2. Upload areas: the chosen file is let go once the upload has been read, so choosing the same file
 *    again (corrected, under the same name) is read again; browsers report no change otherwise.
 */
(function () {
  "use strict";
  document.addEventListener("keydown", function (event) {
    if (event.key !== "Enter" || event.ctrlKey || event.metaKey || event.altKey || event.shiftKey) {
      return;
    }
    var active = document.activeElement;
    if (!active || !active.closest || !active.classList.contains("ag-cell")) {
      return;
    }
    var row = active.closest(".ag-row");
    if (!row) {
      return;
    }
    // a pinned column lives in its own container: find the row by its index across the grid
    var grid = active.closest(".ag-root-wrapper");
    var index = row.getAttribute("row-index");
    var link = grid && grid.querySelector('.ag-row[row-index="' + index + '"] .link-cell');
    if (link) {
      event.preventDefault();
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
})();

// A bqplot brush that tells the kernel its rectangle when the drag ends, not on every move.
//
// bqplot's BrushSelector view sends `brushing` and the corners at the start of a drag and
// at each move. The views act only on the rectangle at the end of the drag, and
// ipywidgets sends a model's changes one message at a time: the message of the release
// waited for the reply to the last move (tens of milliseconds on a busy machine). A view
// taken over here keeps its changes while the model says `brushing`; they go, merged into
// one message, with the end of the drag. A view taken over carries the attribute
// data-cw-brush="at-release" on its element.

/**
 * Keep a bqplot brush view's changes until the end of each drag.
 * @param {any} view a bqplot BrushSelector view (rendered)
 * @returns {boolean} whether the view was taken over
 */
export function holdBrushUntilRelease(view) {
  if (!view || view.__cwBrushHold) return Boolean(view && view.__cwBrushHold);
  const usable = view.model && typeof view.model.get === "function"
    && typeof view.touch === "function" && view.el;
  if (!usable) return false;
  const touch = view.touch;
  view.touch = function touchOnceReleased(...args) {
    // bqplot sets `brushing` false before the last touch of a drag
    if (this.model.get("brushing")) return undefined;
    return touch.apply(this, args);
  };
  view.__cwBrushHold = true;
  view.el.setAttribute("data-cw-brush", "at-release");
  return true;
}

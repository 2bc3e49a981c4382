/** Keyboard movement through a list and the row-window maths of the virtualized unit table. */

/** Height of one table row in CSS pixels (fixed: the table never measures rows). */
export const ROW_HEIGHT = 26;

/** Rows rendered beyond the viewport on each side, so fast scrolling does not show gaps. */
export const OVERSCAN = 12;

/** The cursor after moving by `delta` rows, clamped to [0, count); -1 when the list is empty. */
export function moveCursor(cursor: number, delta: number, count: number): number {
  if (count <= 0) return -1;
  if (cursor < 0) return delta >= 0 ? 0 : count - 1;
  return Math.min(count - 1, Math.max(0, cursor + delta));
}

/** Whole rows that fit in a viewport of this height (at least one): the step of PageUp/PageDown. */
export function pageRows(viewportHeight: number, rowHeight = ROW_HEIGHT): number {
  return Math.max(1, Math.floor(viewportHeight / rowHeight));
}

/**
 * The scroll offset that brings row `index` into view with the least movement
 * (unchanged when it is already fully visible).
 */
export function offsetToReveal(index: number, scrollTop: number, viewportHeight: number, rowHeight = ROW_HEIGHT): number {
  const top = index * rowHeight;
  const bottom = top + rowHeight;
  if (top < scrollTop) return top;
  // Below: align its bottom, unless the row is taller than the viewport (then its top).
  if (bottom > scrollTop + viewportHeight) return Math.max(0, Math.min(top, bottom - viewportHeight));
  return scrollTop;
}

/** The unit table's row window: @tanstack/virtual-core over a scroll element with fixed-height rows. */
import { Virtualizer, observeElementRect, observeElementOffset, elementScroll, type VirtualizerOptions } from '@tanstack/virtual-core';
import { ROW_HEIGHT, OVERSCAN } from './cursor.ts';

type Options = VirtualizerOptions<HTMLElement, HTMLElement>;

/** Options for a fixed-row-height window; observers are parameters so the maths can be checked without a DOM. */
export function rowWindowOptions(
  count: number,
  getScrollElement: () => HTMLElement | null,
  onChange: () => void,
  observe: Pick<Options, 'observeElementRect' | 'observeElementOffset' | 'scrollToFn'> = { observeElementRect, observeElementOffset, scrollToFn: elementScroll },
): Options {
  return {
    count, getScrollElement, estimateSize: () => ROW_HEIGHT, overscan: OVERSCAN,
    getItemKey: (i) => i, onChange: () => onChange(), ...observe,
  };
}

export function createRowWindow(options: Options): Virtualizer<HTMLElement, HTMLElement> {
  return new Virtualizer(options);
}

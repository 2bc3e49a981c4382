/**
 * Notes are stored as the text the reviewer typed and rendered as Markdown (CommonMark, by micromark) only for
 * display. Rendering is safe by construction: raw HTML is not a construct here, so `<script>` comes out as text;
 * micromark drops link targets with other protocols than http(s), mailto, irc(s) and xmpp (javascript: becomes an
 * empty href); images are never rendered, so a note cannot make an offline app or report fetch anything.
 */
import { micromark } from 'micromark';

export interface RenderNoteOptions {
  /** false: links, autolinks and link definitions stay literal text (the self-contained report has no URLs). */
  links?: boolean;
}

const ALWAYS_OFF = ['htmlFlow', 'htmlText', 'labelStartImage'];
const LINK_CONSTRUCTS = ['labelStartLink', 'autolink', 'definition'];

/** Markdown → HTML fragment that is safe to insert into a page. */
export function renderNote(markdown: string, opts: RenderNoteOptions = {}): string {
  const off = opts.links === false ? [...ALWAYS_OFF, ...LINK_CONSTRUCTS] : ALWAYS_OFF;
  return micromark(markdown, { allowDangerousHtml: false, allowDangerousProtocol: false, extensions: [{ disable: { null: off } }] });
}

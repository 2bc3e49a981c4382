/**
 * Notes render as CommonMark through micromark (the reference implementation we build on), with every way of
 * injecting markup or fetching something turned off. Expected HTML for plain Markdown follows the CommonMark spec
 * (spec.commonmark.org, 0.31; the exact example outputs from memory).
 */
import { describe, expect, it } from 'vitest';
import { renderNote } from '../../core/review/note.ts';

describe('renderNote', () => {
  it('renders ordinary Markdown as CommonMark does', () => {
    expect(renderNote('*foo bar*')).toBe('<p><em>foo bar</em></p>');
    expect(renderNote('# Three concepts')).toBe('<h1>Three concepts</h1>');
    expect(renderNote('- a\n- b')).toBe('<ul>\n<li>a</li>\n<li>b</li>\n</ul>');
    expect(renderNote('`a < b`')).toBe('<p><code>a &lt; b</code></p>');
    expect(renderNote('[site](https://example.org "t")')).toBe('<p><a href="https://example.org" title="t">site</a></p>');
  });

  it('shows raw HTML as text', () => {
    expect(renderNote('<script>alert(1)</script>')).toBe('<p>&lt;script&gt;alert(1)&lt;/script&gt;</p>');
    expect(renderNote('<div onclick="x()">hi</div>')).toBe('<p>&lt;div onclick=&quot;x()&quot;&gt;hi&lt;/div&gt;</p>');
    expect(renderNote('a <b onmouseover=alert(1)>b</b>')).toBe('<p>a &lt;b onmouseover=alert(1)&gt;b&lt;/b&gt;</p>');
    expect(renderNote('<!-- hidden -->')).not.toContain('<!--');
  });

  it('empties links with dangerous protocols and never renders images', () => {
    for (const url of ['javascript:alert(1)', 'JaVaScRiPt:alert(1)', 'vbscript:msgbox(1)', 'data:text/html;base64,PHNjcmlwdD4=']) {
      expect(renderNote(`[x](${url})`)).toBe('<p><a href="">x</a></p>');
    }
    expect(renderNote('![pic](https://example.org/a.png)')).not.toMatch(/<img/);
    expect(renderNote('![pic](https://example.org/a.png)')).toBe('<p>!<a href="https://example.org/a.png">pic</a></p>');
  });

  it('keeps link text literal, with no href at all, for the offline report', () => {
    const html = renderNote('see [site](https://example.org), <https://example.org/b> and [ref]\n\n[ref]: https://example.org/c', { links: false });
    expect(html).not.toMatch(/<a\b|href=|src=/);
    expect(html).toContain('[site](https://example.org)');
    expect(html).toContain('&lt;https://example.org/b&gt;');
  });
});

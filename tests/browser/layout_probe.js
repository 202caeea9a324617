// Layout faults of the page as shown: elements past the right edge, text cut off by its box.
(limit) => {
  const W = limit || window.innerWidth;
  const out = {scrollWidth: document.scrollingElement.scrollWidth, innerWidth: window.innerWidth, beyond: [], clipped: []};
  function label(el) {
    const cls = (el.className && el.className.baseVal === undefined) ? String(el.className) : '';
    return el.tagName.toLowerCase() + (cls ? '.' + cls.split(/\s+/).slice(0, 3).join('.') : '') + ' "' + (el.textContent || '').trim().slice(0, 40) + '"';
  }
  function visible(el, r) {
    if (r.width === 0 || r.height === 0) return false;
    const s = getComputedStyle(el);
    return s.visibility !== 'hidden' && s.display !== 'none';
  }
  function hiddenByAncestor(el) {
    // inside a hidden tab: offsetParent null or an ancestor with display none
    return el.getClientRects().length === 0 || (el.checkVisibility && !el.checkVisibility({checkVisibilityCSS: true, contentVisibilityAuto: true}));
  }
  function walk(root) {
    for (const el of root.querySelectorAll('*')) {
      if (el.shadowRoot) walk(el.shadowRoot);
      if (['STYLE', 'SCRIPT', 'CANVAS', 'svg'].includes(el.tagName)) continue;
      // Bokeh's per-renderer nodes over a canvas are clipped by the canvas box, not content of their own.
      if (String(el.className).includes('bk-GlyphRenderer')) continue;
      const r = el.getBoundingClientRect();
      if (!visible(el, r) || hiddenByAncestor(el)) continue;
      if (r.right > W + 1 && r.left < W) out.beyond.push(label(el) + ' right=' + Math.round(r.right));
      const s = getComputedStyle(el);
      const hasText = Array.from(el.childNodes).some(n => n.nodeType === 3 && n.textContent.trim());
      if (hasText && el.scrollWidth > el.clientWidth + 1 && ['hidden', 'clip'].includes(s.overflowX))
        out.clipped.push(label(el) + ' ' + el.scrollWidth + '>' + el.clientWidth);
      if (hasText && s.textOverflow === 'ellipsis' && el.scrollWidth > el.clientWidth + 1)
        out.clipped.push(label(el) + ' ellipsis');
      if (el.tagName === 'TH' && el.scrollWidth > el.clientWidth + 1)
        out.clipped.push('header runs into the next: ' + label(el));
    }
  }
  walk(document);
  out.beyond = out.beyond.slice(0, 15); out.clipped = out.clipped.slice(0, 15);
  return out;
}

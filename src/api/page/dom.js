// @ts-check
// Small DOM helpers of the forecast page: element builders for HTML and inline SVG.

const SVG_NS = 'http://www.w3.org/2000/svg';

/**
 * What a builder takes as children: nodes, text, and nested lists of them; null, undefined and
 * false are skipped, so a child can be written as `cond ? node : null`.
 * @typedef {Node | string | null | undefined | false | ChildList} Child
 * @typedef {Child[]} ChildList
 */

/**
 * Attribute values; null, undefined and false leave the attribute out, true sets it empty.
 * @typedef {Record<string, string | number | boolean | null | undefined>} Attrs
 */

/**
 * One of the page's own elements (they are all in index.html, so a missing one is a fault).
 * @param {string} id
 * @returns {HTMLElement}
 */
export function $(id) {
  const el = document.getElementById(id);
  if (!el) throw new Error(`the page has no element #${id}`);
  return el;
}

/**
 * @param {Child[]} children
 * @returns {(Node | string)[]}
 */
function flatten(children) {
  /** @type {(Node | string)[]} */
  const out = [];
  for (const c of children) {
    if (c === null || c === undefined || c === false) continue;
    if (Array.isArray(c)) out.push(...flatten(c));
    else out.push(c);
  }
  return out;
}

/**
 * @param {Element} el
 * @param {Attrs | null | undefined} attrs
 */
function setAttrs(el, attrs) {
  for (const [k, v] of Object.entries(attrs ?? {})) {
    if (v === null || v === undefined || v === false) continue;
    el.setAttribute(k, v === true ? '' : String(v));
  }
}

/**
 * An HTML element with attributes and children.
 * @template {keyof HTMLElementTagNameMap} K
 * @param {K} tag
 * @param {Attrs | null} [attrs]
 * @param {...Child} children
 * @returns {HTMLElementTagNameMap[K]}
 */
export function h(tag, attrs, ...children) {
  const el = document.createElement(tag);
  setAttrs(el, attrs);
  el.append(...flatten(children));
  return el;
}

/**
 * An SVG element with attributes and children.
 * @template {keyof SVGElementTagNameMap} K
 * @param {K} tag
 * @param {Attrs | null} [attrs]
 * @param {...Child} children
 * @returns {SVGElementTagNameMap[K]}
 */
export function s(tag, attrs, ...children) {
  const el = /** @type {SVGElementTagNameMap[K]} */ (document.createElementNS(SVG_NS, tag));
  setAttrs(el, attrs);
  el.append(...flatten(children));
  return el;
}

/**
 * Replaces the main area's content; null and false entries are skipped.
 * @param {...Child} nodes
 */
export function show(...nodes) {
  $('main').replaceChildren(...flatten(nodes));
}

import { describe, expect, it } from 'vitest';
import { linearTicks, logTicks, tickLabel } from '../src/report/axis.js';
import { histogramOf } from '../src/report/histogram.js';
import { renderMixtureSvg, type MixtureCurve } from '../src/report/mixture-svg.js';
import { Random } from '../src/math/random.js';

interface XmlElement {
  name: string;
  attrs: Record<string, string>;
  children: XmlElement[];
  text: string;
}

/**
 * A strict little XML 1.0 reader for what the renderer emits (elements, attributes, text, character/entity
 * references; no DTD, CDATA or processing instructions). Throws on anything not well-formed: unbalanced or
 * crossed tags, unquoted or repeated attributes, a bare '<' or '&', text outside the root, two roots.
 */
function parseXml(src: string): XmlElement {
  let i = 0;
  const stack: XmlElement[] = [];
  let root: XmlElement | null = null;
  const name = /^[A-Za-z_:][\w.:-]*/;
  const checkText = (t: string): string => {
    if (t.includes('<')) throw new Error('bare < in text');
    return t.replace(/&([^;\s<&]*)(;?)/g, (m, ref: string, semi: string) => {
      if (semi !== ';') throw new Error(`bare & or unterminated reference ${m}`);
      if (/^#\d+$/.test(ref)) return String.fromCodePoint(Number(ref.slice(1)));
      if (/^#x[0-9a-fA-F]+$/.test(ref)) return String.fromCodePoint(parseInt(ref.slice(2), 16));
      const named: Record<string, string> = { amp: '&', lt: '<', gt: '>', quot: '"', apos: "'" };
      if (!(ref in named)) throw new Error(`unknown entity &${ref};`);
      return named[ref];
    });
  };
  while (i < src.length) {
    const lt = src.indexOf('<', i);
    const text = lt < 0 ? src.slice(i) : src.slice(i, lt);
    if (text.trim() !== '') {
      if (stack.length === 0) throw new Error(`text outside the root: ${text.slice(0, 20)}`);
      stack[stack.length - 1].text += checkText(text);
    } else checkText(text);
    if (lt < 0) break;
    i = lt + 1;
    if (src.startsWith('/', i)) {
      const m = name.exec(src.slice(i + 1));
      if (m === null) throw new Error(`bad end tag at ${i}`);
      const open = stack.pop();
      if (open === undefined || open.name !== m[0]) throw new Error(`end tag </${m[0]}> does not match <${open?.name}>`);
      i += 1 + m[0].length;
      while (/\s/.test(src[i])) i++;
      if (src[i] !== '>') throw new Error(`bad end tag </${m[0]}`);
      i++;
      continue;
    }
    const m = name.exec(src.slice(i));
    if (m === null) throw new Error(`bad tag at ${i}: ${src.slice(i, i + 20)}`);
    const el: XmlElement = { name: m[0], attrs: {}, children: [], text: '' };
    i += m[0].length;
    for (;;) {
      const ws = /^\s*/.exec(src.slice(i)) as RegExpExecArray;
      i += ws[0].length;
      if (src.startsWith('/>', i)) {
        i += 2;
        if (stack.length === 0) {
          if (root !== null) throw new Error('two roots');
          root = el;
        } else stack[stack.length - 1].children.push(el);
        break;
      }
      if (src[i] === '>') {
        i++;
        if (stack.length === 0) {
          if (root !== null) throw new Error('two roots');
          root = el;
        } else stack[stack.length - 1].children.push(el);
        stack.push(el);
        break;
      }
      if (ws[0].length === 0) throw new Error(`attributes must be separated by space in <${el.name}>`);
      const a = /^([A-Za-z_:][\w.:-]*)\s*=\s*("([^"<]*)"|'([^'<]*)')/.exec(src.slice(i));
      if (a === null) throw new Error(`bad attribute in <${el.name}> at ${src.slice(i, i + 30)}`);
      if (a[1] in el.attrs) throw new Error(`attribute ${a[1]} repeated in <${el.name}>`);
      el.attrs[a[1]] = checkText(a[3] ?? a[4]);
      i += a[0].length;
    }
  }
  if (stack.length > 0) throw new Error(`unclosed <${stack[stack.length - 1].name}>`);
  if (root === null) throw new Error('no root element');
  return root;
}

function all(el: XmlElement, name: string, out: XmlElement[] = []): XmlElement[] {
  if (el.name === name) out.push(el);
  for (const c of el.children) all(c, name, out);
  return out;
}

function allText(el: XmlElement): string {
  return [el.text, ...el.children.map(allText)].join(' ');
}

const normalPdf = (x: number, m: number, s: number): number => Math.exp(-0.5 * ((x - m) / s) ** 2) / (s * Math.sqrt(2 * Math.PI));

/** Invented data: two Gaussian groups of 300 and 700 values. */
function twoGroups(): Float64Array {
  const rng = new Random(11);
  const v = new Float64Array(1000);
  for (let i = 0; i < 1000; i++) v[i] = i < 300 ? 10 + 2 * rng.normal() : 25 + 3 * rng.normal();
  return v;
}

function mixtureCurves(): MixtureCurve[] {
  return [
    { label: 'mixture', role: 'total', fn: (x) => 0.3 * normalPdf(x, 10, 2) + 0.7 * normalPdf(x, 25, 3) },
    { label: '1: weight 0.300, location 10.0', fn: (x) => 0.3 * normalPdf(x, 10, 2) },
    { label: '2: weight 0.700, location 25.0', fn: (x) => 0.7 * normalPdf(x, 25, 3) },
  ];
}

describe('the XML checker itself', () => {
  it('rejects what is not well-formed', () => {
    expect(() => parseXml('<svg><g></svg></g>')).toThrow();
    expect(() => parseXml('<svg a=1/>')).toThrow();
    expect(() => parseXml('<svg a="1" a="2"/>')).toThrow();
    expect(() => parseXml('<svg>a & b</svg>')).toThrow();
    expect(() => parseXml('<svg/><svg/>')).toThrow();
    expect(() => parseXml('<svg><g>')).toThrow();
    expect(parseXml('<svg a="1"><g>x &amp; y</g></svg>').children[0].text).toBe('x & y');
  });
});

describe('renderMixtureSvg', () => {
  const values = twoGroups();
  const svg = renderMixtureSvg({ title: 'latency: 2 components', xLabel: 'latency (ms)', values, curves: mixtureCurves() });
  const root = parseXml(svg);

  it('is one well-formed SVG document', () => {
    expect(root.name).toBe('svg');
    expect(root.attrs.xmlns).toBe('http://www.w3.org/2000/svg');
    expect(all(root, 'title')[0].text).toBe('latency: 2 components');
  });

  it('draws one path per component plus the total, and no other path', () => {
    const paths = all(root, 'path');
    expect(paths.length).toBe(3);
    expect(paths.filter((p) => p.attrs['data-role'] === 'total').length).toBe(1);
    expect(paths.filter((p) => p.attrs['data-role'] === 'component').map((p) => p.attrs['data-label'])).toEqual([
      '1: weight 0.300, location 10.0',
      '2: weight 0.700, location 25.0',
    ]);
    for (const p of paths) expect(p.attrs.d).toMatch(/^M[\d.]+ [\d.]+(L[\d.]+ [\d.]+){100,}$/);
  });

  it('has histogram bars whose counts add up to the data count, with edges that tile the range', () => {
    const bars = all(root, 'rect').filter((r) => r.attrs.class === 'bar');
    expect(bars.length).toBeGreaterThanOrEqual(10);
    const total = bars.reduce((s, b) => s + Number(b.attrs['data-count']), 0);
    expect(total).toBe(values.length);
    expect(Number(root.attrs['data-n'])).toBe(values.length);
    expect(Number(root.attrs['data-hidden'])).toBe(0);
    const lo = Math.min(...values);
    const hi = Math.max(...values);
    expect(Number(bars[0].attrs['data-lo'])).toBeLessThanOrEqual(lo);
    expect(Number(bars[bars.length - 1].attrs['data-hi'])).toBeGreaterThanOrEqual(hi);
  });

  it('bar heights and curves share the density scale: bar area is the fraction of data in the bin', () => {
    // The tallest bar and the total curve peak should be of similar height on this well-fitting invented data.
    const bars = all(root, 'rect').filter((r) => r.attrs.class === 'bar');
    const tallest = Math.max(...bars.map((b) => Number(b.attrs.height)));
    const total = all(root, 'path').find((p) => p.attrs['data-role'] === 'total') as XmlElement;
    const ys = [...total.attrs.d.matchAll(/[ML]([\d.]+) ([\d.]+)/g)].map((m) => Number(m[2]));
    const baseline = Math.max(...ys);
    const peak = baseline - Math.min(...ys);
    expect(tallest / peak).toBeGreaterThan(0.75);
    expect(tallest / peak).toBeLessThan(1.35);
  });

  it('labels the axes in words, ticks them, and names each component in the legend', () => {
    const text = allText(root);
    expect(text).toContain('latency (ms)');
    expect(text).toContain('density');
    expect(text).toContain('1: weight 0.300, location 10.0');
    expect(text).toContain('data (n = 1000)');
    const ticks = all(root, 'g').find((g) => g.attrs.class === 'tick-labels') as XmlElement;
    expect(ticks.children.length).toBeGreaterThanOrEqual(6);
  });

  it('uses the Okabe–Ito colours', () => {
    const strokes = all(root, 'path').map((p) => p.attrs.stroke);
    expect(strokes).toEqual(['#000000', '#E69F00', '#56B4E9']);
  });

  it('escapes markup in labels', () => {
    const doc = parseXml(
      renderMixtureSvg({ title: 'a < b & "c"', xLabel: "x's <value>", values: [1, 2, 3], curves: [{ label: '<&>', role: 'total', fn: () => 0.3 }] }),
    );
    expect(all(doc, 'title')[0].text).toBe('a < b & "c"');
    expect(allText(doc)).toContain("x's <value>");
    expect(all(doc, 'path')[0].attrs['data-label']).toBe('<&>');
  });

  it('on a log axis counts values it cannot place and draws density per decade', () => {
    const rng = new Random(5);
    const v: number[] = [0, -1];
    for (let i = 0; i < 500; i++) v.push(Math.exp(3 + 0.5 * rng.normal()));
    const pdf = (x: number): number => (x > 0 ? normalPdf(Math.log(x), 3, 0.5) / x : 0);
    const doc = parseXml(renderMixtureSvg({ title: 't', xLabel: 'size', values: v, logX: true, curves: [{ label: 'fit', role: 'total', fn: pdf }] }));
    expect(doc.attrs['data-log-x']).toBe('true');
    expect(Number(doc.attrs['data-hidden'])).toBe(2);
    const bars = all(doc, 'rect').filter((r) => r.attrs.class === 'bar');
    expect(bars.reduce((s, b) => s + Number(b.attrs['data-count']), 0)).toBe(500);
    // Bars equal in log10 width.
    const w = bars.map((b) => Math.log10(Number(b.attrs['data-hi'])) - Math.log10(Number(b.attrs['data-lo'])));
    for (const x of w) expect(x).toBeCloseTo(w[0], 9);
    const text = allText(doc);
    expect(text).toContain('size (log scale)');
    expect(text).toContain('density per decade of size');
    expect(text).toContain('2 values not shown');
  });

  it('takes a ready histogram and point curves (for the web page)', () => {
    const doc = parseXml(
      renderMixtureSvg({
        title: 'recent values',
        xLabel: 'ms',
        histogram: { edges: [0, 10, 20, 30], counts: [5, 0, 15] },
        curves: [{ label: 'now', role: 'total', points: [[0, 0.02], [15, 0.03], [30, 0.05]] }],
      }),
    );
    const bars = all(doc, 'rect').filter((r) => r.attrs.class === 'bar');
    expect(bars.map((b) => Number(b.attrs['data-count']))).toEqual([5, 15]);
    expect(doc.attrs['data-n']).toBe('20');
    expect(all(doc, 'path')[0].attrs.d.split('L').length).toBe(3);
    expect(() => renderMixtureSvg({ title: 'x', xLabel: 'x', histogram: { edges: [0, 1], counts: [1, 2] }, curves: [] })).toThrow(/one more/);
  });
});

describe('axis and histogram helpers', () => {
  it('linear ticks step by 1, 2 or 5 times a power of ten', () => {
    expect(linearTicks(0, 1, 5)).toEqual([0, 0.2, 0.4, 0.6, 0.8, 1]);
    expect(linearTicks(43, 96, 7)).toEqual([50, 60, 70, 80, 90]);
    expect(linearTicks(-0.013, 0.021, 4)).toEqual([-0.01, 0, 0.01, 0.02]);
  });

  it('log ticks are decades (with 2 and 5 over short ranges)', () => {
    expect(logTicks(1, 1e6)).toEqual([1, 10, 100, 1000, 1e4, 1e5, 1e6]);
    expect(logTicks(1, 100)).toEqual([1, 2, 5, 10, 20, 50, 100]);
    expect(logTicks(43, 96)).toEqual([50, 60, 70, 80, 90]);
  });

  it('tick labels are short', () => {
    expect(tickLabel(0.30000000000000004)).toBe('0.3');
    expect(tickLabel(2e7)).toBe('2e7');
    expect(tickLabel(1.5e-6)).toBe('1.5e-6');
  });

  it('histograms count every finite value once', () => {
    const v = twoGroups();
    const h = histogramOf(v);
    expect(h.counts.reduce((s, c) => s + c, 0)).toBe(v.length);
    expect(h.edges.length).toBe(h.counts.length + 1);
    const one = histogramOf([4, 4, 4]);
    expect(one.counts.reduce((s, c) => s + c, 0)).toBe(3);
    const withBad = histogramOf([1, NaN, Infinity, 2]);
    expect(withBad.hidden).toBe(2);
  });
});

/**
 * The page's stylesheet. Plain and readable: system fonts, dark text on white, one accent.
 * Chart colours are from the Okabe–Ito palette (Okabe & Ito 2008, "Color Universal Design"),
 * which stays distinguishable for the common forms of colour blindness; every coloured mark also
 * has a word label, a line style or a symbol, so nothing is told by colour alone.
 */
export const PAGE_STYLE = String.raw`
:root {
  --ink: #1b1b1b;
  --muted: #555;
  --rule: #d6d6d6;
  --panel: #f6f6f4;
  --accent: #0072B2;
  --warn: #D55E00;
  font-family: system-ui, -apple-system, "Segoe UI", Roboto, "Noto Sans", sans-serif;
  color: var(--ink);
  background: #fff;
  line-height: 1.45;
}
body { margin: 0; }
a { color: var(--accent); }
a:focus-visible, button:focus-visible, input:focus-visible, summary:focus-visible { outline: 3px solid #E69F00; outline-offset: 2px; }
.top { display: flex; align-items: baseline; gap: 1rem; padding: .6rem 1.2rem; border-bottom: 1px solid var(--rule); background: var(--panel); }
.brand { font-weight: 700; font-size: 1.15rem; text-decoration: none; color: var(--ink); letter-spacing: .02em; }
.tagline { color: var(--muted); font-size: .9rem; }
.live { margin-left: auto; color: var(--muted); font-size: .85rem; }
.live.stale { color: var(--warn); font-weight: 600; }
main { padding: 1rem 1.2rem 3rem; max-width: 72rem; }
h1 { font-size: 1.5rem; margin: .4rem 0 .6rem; word-break: break-all; }
h2 { font-size: 1.15rem; margin: 1.6rem 0 .5rem; border-bottom: 1px solid var(--rule); padding-bottom: .2rem; }
h3 { font-size: 1rem; margin: 1rem 0 .4rem; }
.crumbs { font-size: .9rem; margin: 0; }
.facts { display: grid; grid-template-columns: repeat(auto-fill, minmax(11rem, 1fr)); gap: .4rem 1rem; margin: .4rem 0 .8rem; }
.facts div { background: var(--panel); padding: .35rem .6rem; border-radius: 4px; }
.facts dt { font-size: .78rem; color: var(--muted); }
.facts dd { margin: 0; font-weight: 600; font-variant-numeric: tabular-nums; }
table { border-collapse: collapse; width: 100%; font-variant-numeric: tabular-nums; }
caption { text-align: left; color: var(--muted); font-size: .85rem; padding-bottom: .3rem; }
th, td { text-align: left; padding: .3rem .55rem; border-bottom: 1px solid var(--rule); vertical-align: middle; }
thead th { font-size: .82rem; color: var(--muted); font-weight: 600; background: #fafafa; }
tbody th { font-weight: 600; }
td.nowrap { white-space: nowrap; }
td.num, th.num { text-align: right; }
tbody tr:hover { background: #fbfaf5; }
.filter { display: flex; gap: .6rem; align-items: center; margin: .6rem 0; flex-wrap: wrap; }
.filter input { font: inherit; padding: .3rem .5rem; border: 1px solid #999; border-radius: 4px; min-width: 16rem; }
.muted { color: var(--muted); }
.state { white-space: nowrap; }
.badge { display: inline-block; padding: 0 .4rem; border-radius: 3px; font-size: .82rem; font-weight: 600; border: 1px solid currentColor; white-space: nowrap; }
.badge.firing { color: #a33d00; background: #fff3ec; }
.badge.pending { color: #6b5200; background: #fffbe6; }
.badge.resolved { color: #00664a; background: #eefaf5; }
.badge.quiet { color: var(--muted); }
.chart { width: 100%; max-width: 62rem; height: auto; display: block; }
.chart text { font-size: 11px; fill: var(--ink); font-family: inherit; }
.chart .axis line, .chart .axis path { stroke: #444; }
.chart .grid { stroke: #eee; }
figure { margin: .5rem 0; }
figcaption { font-size: .85rem; color: var(--muted); margin-top: .3rem; }
.legend { list-style: none; padding: 0; margin: .4rem 0; display: flex; flex-wrap: wrap; gap: .3rem 1.2rem; font-size: .88rem; }
.legend li { display: flex; align-items: center; gap: .4rem; }
.spark { display: inline-block; vertical-align: middle; }
.spark-values { font-size: .8rem; color: var(--muted); margin-left: .4rem; white-space: nowrap; font-variant-numeric: tabular-nums; }
.timeline { list-style: none; padding: 0; margin: 0; }
.timeline > li { border-left: 3px solid var(--rule); padding: .4rem .8rem .6rem; margin: 0 0 .6rem; }
.timeline > li.firing { border-left-color: #D55E00; }
.timeline > li.pending { border-left-color: #E69F00; }
.timeline > li.resolved { border-left-color: #009E73; }
.timeline .when { color: var(--muted); font-size: .85rem; font-variant-numeric: tabular-nums; }
.timeline .what { font-weight: 600; }
details { margin-top: .3rem; }
summary { cursor: pointer; color: var(--accent); font-size: .9rem; }
.evidence { display: grid; grid-template-columns: max-content 1fr; gap: .1rem .8rem; font-size: .88rem; margin: .4rem 0; }
.evidence dt { color: var(--muted); }
.evidence dd { margin: 0; font-variant-numeric: tabular-nums; }
.pair { display: grid; grid-template-columns: 1fr 1fr; gap: 1rem; }
@media (max-width: 48rem) { .pair { grid-template-columns: 1fr; } }
.pair table { font-size: .85rem; align-self: start; }
button { font: inherit; padding: .3rem .7rem; border: 1px solid #666; border-radius: 4px; background: #fff; cursor: pointer; }
button:hover { background: var(--panel); }
.note { font-size: .88rem; color: var(--muted); }
.message { font-size: .9rem; margin-left: .6rem; }
.swatch { flex: none; }
.visually-hidden { position: absolute; width: 1px; height: 1px; overflow: hidden; clip: rect(0 0 0 0); white-space: nowrap; }
`;

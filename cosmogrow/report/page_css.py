"""The web report's stylesheet (inline in the page): the figures' palette, a print stylesheet.

No web fonts: system font stacks only, so the page renders offline and identically in print.
"""

from .style import INK, PALETTE

TEAL, OCHRE, PLUM, SLATE, BRICK, OLIVE = PALETTE
KIND_COLOURS = {"fit": TEAL, "campaign": PLUM, "nulltests": OLIVE, "challenge": BRICK,
                "budget": OCHRE, "remnants": SLATE, "forecast": TEAL}

_CSS = """
:root {
  --teal: @TEAL; --ochre: @OCHRE; --plum: @PLUM; --slate: @SLATE; --brick: @BRICK; --olive: @OLIVE;
  --ink: @INK; --paper: #f4f1ea; --card: #ffffff; --rule: #dcd5c6; --stripe: #faf8f3;
  --tint-teal: #e4eff0; --tint-brick: #f7e7e2; --tint-ochre: #f8efdb; --tint-olive: #edf0e0;
  --serif: Georgia, "DejaVu Serif", "Times New Roman", serif;
  --sans: system-ui, -apple-system, "Segoe UI", "DejaVu Sans", "Helvetica Neue", Arial, sans-serif;
  --mono: ui-monospace, "DejaVu Sans Mono", Menlo, Consolas, monospace;
}
* { box-sizing: border-box; }
html { background: var(--paper); }
body { margin: 0; color: var(--ink); font: 15px/1.5 var(--sans); font-variant-numeric: tabular-nums; }
a { color: var(--teal); }
.masthead { background: var(--teal); color: #fff; padding: 26px 0 20px; border-bottom: 5px solid var(--ochre); }
.inner, main, footer { max-width: 1140px; margin: 0 auto; padding: 0 28px; }
.brand { letter-spacing: .2em; text-transform: uppercase; font-size: 12px; opacity: .85; margin: 0; }
.brand b { color: #f3d596; font-weight: 700; }
h1 { font: normal 31px/1.2 var(--serif); margin: 6px 0 6px; }
.sub { margin: 0; font-size: 14px; opacity: .92; }
h2 { font: normal 24px/1.25 var(--serif); color: var(--teal); margin: 2px 0 10px; }
h3 { font: 600 16px/1.3 var(--sans); margin: 22px 0 6px; color: var(--ink); }
h4 { font: 600 14px/1.3 var(--sans); margin: 14px 0 4px; color: var(--slate); }
.kicker { text-transform: uppercase; letter-spacing: .12em; font-size: 11.5px; color: var(--ochre);
  font-weight: 700; margin: 0; }
.kicker a { color: inherit; text-decoration: none; }
section.block, nav.block { background: var(--card); border: 1px solid var(--rule); border-radius: 6px;
  padding: 22px 26px 24px; margin: 22px 0; }
section.result { border-top: 5px solid var(--accent, var(--teal)); }
section.result h2 { color: var(--accent, var(--teal)); }
.section-pills { margin: -4px 0 8px; }
.lede { font-size: 16px; max-width: 60em; }
.note { color: var(--slate); font-style: italic; }
.cards { display: grid; grid-template-columns: repeat(auto-fit, minmax(330px, 1fr)); gap: 16px; }
.card { border: 1px solid var(--rule); border-top: 4px solid var(--teal); border-radius: 6px;
  padding: 14px 18px 16px; background: #fff; display: flex; flex-wrap: wrap; gap: 4px 40px;
  align-items: flex-start; }
.card .card-main { flex: 0 1 auto; }
.card dl.facts { flex: 1 1 300px; margin-top: 14px; }
a.pill { text-decoration: none; }
.k-value { font: normal 42px/1.1 var(--serif); color: var(--teal); margin: 6px 0 8px; white-space: nowrap; }
.k-value var { font-style: italic; }
.pm { display: inline-flex; flex-direction: column; font-size: 17px; line-height: 1.2;
  vertical-align: middle; margin-left: 6px; }
.pm sup, .pm sub { font-size: inherit; vertical-align: baseline; }
.pills { margin: 0 0 6px; }
dl.facts { display: grid; grid-template-columns: max-content 1fr; gap: 3px 18px; margin: 10px 0 4px;
  font-size: 14px; }
dl.facts dt { color: var(--slate); }
dl.facts dd { margin: 0; overflow-wrap: anywhere; }
.pill { display: inline-block; padding: 1px 10px; border-radius: 999px; font-size: 12px; font-weight: 700;
  border: 1px solid; margin: 0 4px 3px 0; white-space: nowrap; }
.pill-good { color: var(--olive); background: var(--tint-olive); border-color: var(--olive); }
.pill-bad { color: #fff; background: var(--brick); border-color: var(--brick); }
.pill-warn { color: #7a5610; background: var(--tint-ochre); border-color: var(--ochre); }
.pill-info { color: var(--teal); background: var(--tint-teal); border-color: var(--teal); }
.pill-muted { color: var(--slate); background: #f2f1ed; border-color: var(--rule); }
ul.glance { list-style: none; padding: 0; margin: 16px 0 0; display: grid; gap: 6px; }
ul.glance li { padding: 6px 12px; border-left: 4px solid var(--accent, var(--teal)); background: var(--stripe); }
ul.glance .what { font-weight: 700; margin-right: 6px; }
.warnings { border-left: 6px solid var(--brick); background: var(--tint-brick); }
.warnings h2 { color: var(--brick); }
.warnings ol { margin: 8px 0 0; padding-left: 22px; }
.warnings li { margin: 0 0 6px; }
.warnings .where { font-weight: 700; color: var(--brick); margin-right: 4px; }
.all-clear { border-left: 6px solid var(--olive); background: var(--tint-olive); }
.all-clear h2 { color: var(--olive); }
nav.toc ol { columns: 2; column-gap: 40px; margin: 6px 0 0; padding-left: 22px; }
nav.toc li { margin: 2px 0; }
nav.toc .kind { color: var(--slate); font-size: 13px; }
.table-wrap { overflow-x: auto; margin: 14px 0 18px; }
table.data { border-collapse: collapse; width: 100%; font-size: 13.5px; }
table.narrow { width: auto; min-width: 50%; }
table.data caption { caption-side: top; text-align: left; color: var(--slate); font-size: 13px;
  padding: 0 0 6px; }
.label { font-weight: 700; color: var(--ink); }
table.data th, table.data td { padding: 5px 10px; border-bottom: 1px solid #ebe5d8; text-align: left;
  vertical-align: top; }
table.data thead th { border-bottom: 2px solid var(--ink); font-size: 12.5px; font-weight: 700;
  color: var(--slate); vertical-align: bottom; }
table.data tbody th { font-weight: 600; }
table.data tbody tr:nth-child(even) { background: var(--stripe); }
table.data .num { text-align: right; white-space: nowrap; }
table.data thead th.num { white-space: normal; }
table.data .text { white-space: normal; min-width: 8em; }
table.data tbody th { overflow-wrap: break-word; }
.pair { display: grid; grid-template-columns: repeat(auto-fit, minmax(380px, 1fr)); gap: 0 28px; }
.pair table.narrow { width: 100%; }
table.data td.bad, table.data th.bad { color: var(--brick); font-weight: 700; background: var(--tint-brick); }
table.data td.good { color: var(--olive); font-weight: 700; }
var { font-family: var(--serif); font-size: 1.08em; }
.figs { display: grid; grid-template-columns: repeat(auto-fit, minmax(440px, 1fr)); gap: 18px; margin: 16px 0 4px; }
figure.fig { margin: 0; border: 1px solid var(--rule); border-radius: 4px; padding: 12px; background: #fff; }
figure.wide { grid-column: 1 / -1; }
figure.fig img { display: block; width: auto; height: auto; max-width: 100%; max-height: 680px;
  margin: 0 auto; }
figure.wide img { max-width: min(100%, 900px); }
figcaption { font-size: 13px; color: var(--slate); margin-top: 8px; }
.file { font-family: var(--mono); font-size: 11.5px; color: #858a90; }
.verdict { font: 18px/1.4 var(--serif); padding: 10px 16px; border-left: 5px solid var(--teal);
  background: var(--tint-teal); margin: 6px 0 14px; }
.verdict-good { border-color: var(--olive); background: var(--tint-olive); }
.verdict-bad { border-color: var(--brick); background: var(--tint-brick); }
.assumptions ul, .caveats ul { margin: 4px 0; padding-left: 22px; }
.assumptions li, .caveats li { margin: 0 0 4px; }
.method p { max-width: 62em; }
ol.references li { margin: 0 0 5px; }
ol.references .journal { color: var(--slate); }
pre { font: 12px/1.45 var(--mono); background: #f7f5ef; border: 1px solid var(--rule); border-radius: 4px;
  padding: 10px 12px; overflow-x: auto; white-space: pre-wrap; overflow-wrap: anywhere; }
.mono { font-family: var(--mono); font-size: 12.5px; overflow-wrap: anywhere; }
details { margin: 8px 0; }
details > summary { cursor: pointer; color: var(--teal); font-weight: 600; }
footer { color: var(--slate); font-size: 12.5px; padding-top: 4px; padding-bottom: 40px; }
@media (max-width: 640px) {
  .figs { grid-template-columns: 1fr; }
  nav.toc ol { columns: 1; }
  .k-value { font-size: 34px; }
}
@media print {
  @page { size: A4; margin: 14mm 12mm; }
  html, body { background: #fff; font-size: 9.5pt; }
  .masthead { background: none; color: var(--ink); border-bottom: 2px solid var(--teal); padding: 0 0 8px; }
  .masthead .brand, .masthead .brand b { color: var(--teal); opacity: 1; }
  .inner, main, footer { max-width: none; padding: 0; }
  nav.toc { display: none; }
  section.block, nav.block { border: none; border-radius: 0; padding: 0; margin: 0 0 14pt; }
  section.result { border-top: 2pt solid var(--accent, var(--teal)); padding-top: 6pt; }
  h2, h3, h4, .kicker { break-after: avoid; }
  figure.fig, .table-wrap, .card, .warnings li, .verdict, dl.facts { break-inside: avoid; }
  .figs { display: block; }
  figure.fig { border: none; padding: 0; margin: 0 0 10pt; }
  figure.fig img { max-height: 115mm; width: auto; }
  .table-wrap { overflow: visible; }
  a { color: inherit; text-decoration: none; }
  .pill, table.data td.bad, .warnings, .all-clear, .verdict, .masthead, section.result {
    -webkit-print-color-adjust: exact; print-color-adjust: exact; }
  details:not([open]) { display: none; }
}
"""


def stylesheet():
    """The page's CSS with the house palette filled in."""
    css = _CSS
    for name, value in (("TEAL", TEAL), ("OCHRE", OCHRE), ("PLUM", PLUM), ("SLATE", SLATE),
                        ("BRICK", BRICK), ("OLIVE", OLIVE), ("INK", INK)):
        css = css.replace(f"@{name}", value)
    return css.strip() + "\n"

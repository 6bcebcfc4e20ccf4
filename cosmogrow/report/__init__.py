"""Figures and reports drawn from results (the only layer that imports matplotlib).

To add a section to the web page: (1) write `<kind>_context(document, folder) -> dict` (and
`<kind>_warnings(document) -> list of str`) in a `*_section.py` module, building `formatting.table`
values and plain strings only; (2) write templates/sections/<kind>.html.j2, which receives that dict
as `s` and the building blocks of macros.html.j2 as `m` (`m.table`, `m.facts`, `m.note`, …);
(3) register a `SectionKind` in `sections.SECTIONS` (marker file, words, colour, figures).
The page itself is templates/page.html.j2 (autoescaping Jinja2; see `html.build_report`).
"""

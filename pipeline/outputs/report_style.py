"""The report's style sheet and script, and the placeholder for a figure that could not be drawn.

The style prints to A4 or Letter (:func:`page_css`): each major section and each deficient
curve starts a new page, headings keep with what follows them, a table's header row repeats
on every page it runs over and no figure or table row is split. The script records how many
images loaded (``data-images-loaded`` on the body), for the browser check.
"""

# severity colours, one place for every output: one hue from light to dark, the worst the darkest,
# so the order reads the same to every kind of colour vision and in grey (the 4-class "Oranges"
# sequential scheme of ColorBrewer, Brewer 2003, its three darkest classes)
SEVERITY_COLOURS = {"minor": "#FDBE85", "moderate": "#FD8D3C", "severe": "#D94701"}
# the road network drawn under them, in every output (map, figures, GIS styles)
ROAD_GREY = "#9A9A9A"

CSS = """
body { font-family: "DejaVu Sans", Arial, sans-serif; font-size: 10.5pt; color: #1a1a1a; margin: 1.5em auto;
       max-width: 1100px; line-height: 1.35; }
h1 { font-size: 19pt; margin-bottom: 0.2em; } h2 { font-size: 14pt; border-bottom: 2px solid #3B1F5C;
     padding-bottom: 2px; margin-top: 1.6em; } h3 { font-size: 12pt; margin: 0.4em 0; }
.caution { border: 2px solid #C2452D; background: #FCEFEA; padding: 0.6em 0.9em; font-weight: bold; }
.cards { display: flex; flex-wrap: wrap; gap: 0.6em; } .card { border: 1px solid #bbb; border-radius: 4px;
        padding: 0.4em 0.8em; min-width: 8em; } .card b { display: block; font-size: 15pt; }
table { border-collapse: collapse; width: 100%; font-size: 8.8pt; margin: 0.4em 0; }
th, td { border: 1px solid #c8c8c8; padding: 2px 4px; text-align: left; vertical-align: top; }
th { background: #DDE4EE; } td.n { text-align: right; font-variant-numeric: tabular-nums; }
img { max-width: 100%; } .curve { page-break-before: always; break-before: page; }
h4 { font-size: 10.5pt; margin: 0.6em 0 0.2em; } .road { border-top: 1px solid #c8c8c8; margin-top: 1.2em; }
.sites li { margin-bottom: 0.35em; } .toc-roads { margin: 0.2em 0 0.4em; }
/* print: every major section on a new page (not the contents and the brief on page 1); headings
   kept with what follows; header rows repeated; figures, rows and a road's head never split */
h2 { page-break-before: always; break-before: page; }
nav h2, h2#brief { page-break-before: auto; break-before: auto; }
h1, h2, h3, h4 { page-break-after: avoid; break-after: avoid; page-break-inside: avoid; break-inside: avoid; }
.wide { page: wide; } @media print { .wide table { font-size: 7.4pt; } }
thead { display: table-header-group; } tr, img, .keep, .caution, .card, .sites li {
        page-break-inside: avoid; break-inside: avoid; }
.facts td:first-child { width: 16em; color: #444; } .small { font-size: 8.5pt; color: #444; }
.sev-minor { border-left: 6px solid @minor@; } .sev-moderate { border-left: 6px solid @moderate@; }
.sev-severe { border-left: 6px solid @severe@; }
@media print { body { max-width: none; margin: 0; } a { color: black; } }
"""
for _name, _colour in SEVERITY_COLOURS.items():
    CSS = CSS.replace(f"@{_name}@", _colour)



def page_css(us: bool) -> str:
    """The printed page: A4 for a metric run, Letter for a US customary one.

    The layout fits both (14 mm margins leave 182 mm x 251 mm on either sheet, A4's width and
    Letter's height being the smaller), so a report printed on the other size only scales.

    Parameters
    ----------
    us : bool
        Whether the run's units are US customary.

    Returns
    -------
    str
        ``@page`` rules following :data:`CSS` (CSS Paged Media Level 3, ``size`` and named
        pages): the sheet upright, and turned (``wide``) for the ranked inventory's many
        columns.
    """
    paper = "letter" if us else "A4"
    return (f"@page {{ size: {paper}; margin: 14mm; }} @page wide {{ size: {paper} landscape; margin: 12mm; }}")


LOADED_JS = """window.addEventListener('load', function () {
  var imgs = Array.prototype.slice.call(document.images);
  var ok = imgs.filter(function (i) { return i.complete && i.naturalWidth > 0; }).length;
  document.body.setAttribute('data-images-loaded', ok + '/' + imgs.length);
});"""


FIGURE_MISSING = ("<p class='caution figure-missing'>{what} could not be drawn; the failure is recorded in "
                  "run.json (output_failures). The data files (CSV, workbook, GeoPackage) are complete.</p>")

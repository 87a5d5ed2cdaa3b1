"""Stage 5, report: figures and the self-contained HTML report.

Takes the results of the other stages (their JSON forms and value objects) and gives PNG
figures and one HTML file. matplotlib is imported only here.

figures
    assessment figures: FRF, damping, root locus, Nyquist, one-third-octave and cumulative RMS
figures_sizing
    sizing figures: damping and cost per pair count, damping per mode
html
    the HTML report (images embedded, no network needed)
compare, figures_compare
    every option side by side (passive, shaping, active, combinations): the table, its page,
    the FRF overlay and the cost-against-result chart

Imports every stage below it; only the command line imports it.
"""

__all__: list[str] = []

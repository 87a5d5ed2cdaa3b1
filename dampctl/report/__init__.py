"""Stage 5, report: figures and the self-contained HTML report.

Takes the results of the other stages (their JSON forms and value objects) and gives PNG
figures and one HTML file. matplotlib is imported only here.

style
    the one palette, line kinds and figure sizes; rendering to png, svg or pdf
figures, figures_loop
    assessment figures: FRF (magnitude and phase), damping, one-third-octave, cumulative RMS;
    per loop the Bode plot of L with margins, |S| and |T|, Nyquist zoomed on −1; root locus
    in Hz
figures_sizing
    sizing figures: damping and cost per pair count, damping per mode
html
    the HTML report (images embedded, no network needed)
designs
    two to six designs in one report (FRFs, damping and margins overlaid)
compare, figures_compare
    every option side by side (passive, shaping, active, combinations): the table, its page,
    the FRF overlay and the cost-against-result chart

Imports every stage below it; only the command line imports it.
"""

__all__: list[str] = []

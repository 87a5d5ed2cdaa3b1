"""Stage 4a, damping laws: each turns a plant and a choice of pairs into a
:class:`~dampctl.design.Design`.

Collocated, decentralized (one SISO loop per pair; ``design(plant, pairs, *, modes=None,
target_damping=None, gain=None, delay_s=None, ...)``)
    dvf
        direct velocity feedback u = −g v (velocity sensor, or displacement sensor through a
        band-limited differentiator), with a roll-off where the plant states a delay or
        hardware bandwidth
    iff
        integral force feedback on an active strut with its own force sensor: leaky integrator
        g/(s + ω_c), tuned from Preumont's maximum-damping result
    ppf
        positive position feedback: a bank of second-order filters, one per target mode, tuned
        by the equal-damping (pole-coalescence) rule, with the static stability condition

Model-based (MIMO)
    lqg
        observer-based controller on a reduced modal model (its own module)

Command shaping (no feedback)
    shapers (ZV, ZVD, ZVDD and EI impulse sequences, residual vibration, the shaper file),
    shaping (design_shaper(): shapers for a plant's open- or closed-loop modes, with their
    insensitivity and drift robustness)

Passive (parts, no loop: ``design(plant, ...)`` gives a Design holding the parts)
    tmd
        tuned-mass dampers: Den Hartog / Brock rule, refined on the full plant for the smallest
        output peak
    viscous
        dampers between sites (or a site and the ground), with an optional mounting spring,
        sized for the largest smallest damping
    shunt
        R or RL networks on piezoelectric struts (Hagood & von Flotow), refined like tmd

Shared pieces
    _checks (pairs, collocation, clusters), _tuning (batched gain search), _assemble,
    _lqg_gains (LQG weights, Riccati solves, goal corrections), spillover (full-plant check
    of model-based designs), reduction (balanced truncation of a controller with its bound),
    _passive (the passive laws' peak objective and refinement)

Sign convention for all laws: u = −K(s) y (negative feedback). Import the law modules
directly (``from dampctl.laws import dvf``); nothing is imported here at package import.
"""

__all__: list[str] = []

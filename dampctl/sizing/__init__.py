"""Stage 4b, sizing: how many actuator/sensor pairs, which ones, and what each costs and buys.

Takes a plant, a law and a target and gives, for each pair count, the best set of candidate
pairs tuned by that law, with its cost, damping per cost, effort and margins
(:class:`~dampctl.sizing.size.SizingResult`).

screening
    batched closed-loop evaluation of candidate sets (affine in the gain)
setsearch
    every set with pilot-gain screening, or greedy with swaps
size
    size_pairs(): the rows, the rank rule for near-repeated clusters, the verdict

Imports the model, the analysis and the laws.
"""

from dampctl.sizing.size import SizingResult, size_pairs

__all__ = ["SizingResult", "size_pairs"]

"""Damping laws: each module turns a plant and a choice of hardware into a Design."""

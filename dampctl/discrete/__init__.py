"""Stage 4c, discrete export: coefficients for the DSP or FPGA, verified in discrete time.

Takes a design and a sample rate and gives second-order sections or a state space (Tustin with
prewarping, or ZOH), optionally quantized to fixed point, checked in the sampled closed loop,
and the text of the export files.

equivalents
    discrete equivalents of each loop as second-order sections
mimo
    discrete MIMO (LQG) controllers: state space and modal biquads
sections
    cascade and parallel forms, transmission zeros
fixedpoint
    Q15 / Q31 coefficients with a post-shift, pole-shift report, refusal
sampledloop
    the sampled closed loop (ZOH plant, one sample of computation delay)
export
    export_design(): discretize, quantize, verify
writers
    export file texts: JSON, CSV, C header with reference routines
modalzoh, timeloop
    the exact sampled modal structure (per mode, lags and sub-sample switching) and the loop
    that steps it with the exported controller, the loop delay and saturation
profiles, simulate, simresult
    move profiles and random records; simulate_move() and simulate_disturbance(), open loop
    and as the loop will run; their results

Imports the model, the design and the analysis.
"""

from dampctl.discrete.equivalents import discretize
from dampctl.discrete.export import export_design
from dampctl.discrete.simulate import simulate_disturbance, simulate_move

__all__ = ["discretize", "export_design", "simulate_disturbance", "simulate_move"]

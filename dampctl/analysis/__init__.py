"""Stage 3, analysis: what a design does on its plant.

Takes a :class:`~dampctl.model.plant.ModalPlant` and a :class:`~dampctl.design.Design` and
gives closed-loop modes, margins, robustness, disturbance response, effort and the
requirement checks, gathered in an :class:`~dampctl.analysis.assessment.Assessment`.

closedloop
    closed-loop state matrix, delay (Padé cascade), roll-offs, matching poles to modes
loopmodel
    effective controllers for pole computations (delay sections, gain locus)
modetable
    one closed-loop row per plant mode, matched by assignment (tune, assess, report)
margins
    loop-at-a-time and disk margins at the plant input, exact delay
robustness
    frequency drift, extra delay, hardware bandwidth, spillover
response
    disturbance and sensor-noise response (Lyapunov and frequency integral)
effort
    RMS actuator command under the plant's disturbances
vc
    vibration criterion curves and one-third-octave spectra
assessment
    assess(): everything above against the plant file's requirements
assess_json
    the JSON form of an assessment and its plain robustness lines
passive
    passive parts (absorbers, dampers, shunts) as an augmentation of the plant's state space
passive_assessment
    assess() of a passive design: the structure with its parts, no loop

Imports the model and the design only; the laws, sizing and export build on it.
"""

from dampctl.analysis.assessment import Assessment, assess

__all__ = ["Assessment", "assess"]
